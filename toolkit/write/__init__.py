"""Everything lacuna writes: the drawing copy, the SVG figures, the report, the schedule, the JSON summaries, and
the one way files reach the disk.

- :mod:`.files`: whole files or none (plan first, temporary name, rename; ``--force``).
- :mod:`.summary`: the JSON summaries and the drawing's notes; :mod:`.schedule`: the schedule CSV;
  :mod:`.report`: the Markdown report.
- :mod:`.layers`: our output layers' names and looks, read by the drawing copy and the sheets alike;
  :mod:`.shapes`: the voids, freeform rings and check markers both draw, checked once.
- :mod:`.dxf_copy`: the results on the LACUNA-* layers of a copy of the drawing (or in place);
  :mod:`.dxf_file`: DXF versions and bytes, shared with :mod:`toolkit.convert`.
- :mod:`.sheet`: the sheet every figure is drawn on (numbers, paths, lettering, heading, key, scale bar, title
  block); :mod:`.fields`: stress and material-state fills with their bars; :mod:`.symbols`: the panel's lines,
  supports and loads; :mod:`.palette`: the diverging colour scale.
- One module per figure: :mod:`.analysis_figure`, :mod:`.result_sheet`, :mod:`.layout_frame`,
  :mod:`.convergence_plot`, :mod:`.tradeoff_plot`.

Nothing is imported here, so that importing one writer does not import the drawing and SVG libraries of all.
"""
