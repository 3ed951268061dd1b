"""The same inputs give the same outputs: every file of the runs in tests/same_outputs.py (the demo's `optimize`
with frames and its `analyze`, an `optimize` in metres with slots, a `check`, three conversions, a trade-off plot)
against the digests in tests/same_outputs.json, recorded from the code as it was before the writers moved into
toolkit/write/ and the converter into toolkit/convert/.

What is pinned, and why two ways:

- "rounded": each file with the per-run values masked (today's date, the output folder, the DXF save stamps) and
  every decimal number rounded to 9 significant figures. This holds on any machine of the same kind with the
  same library versions: a difference in the last bits of a float (another BLAS, another processor) does not
  count, anything a reader could see does.
- "exact": the masked bytes themselves, the claim that a move changed nothing. Floats in the DXF and JSON are
  written to the last bit, so these digests are checked only where the recorded environment (Python, machine,
  and the versions of numpy, scipy, shapely, ezdxf, svgwrite, whose own output is in the files) is the one
  running; elsewhere that test is skipped and says why.

A library upgrade that changes its own output (an ezdxf header default, svgwrite's attribute order) fails the
rounded check too: record again with `python tests/same_outputs.py --record` on code known to be unchanged.
"""

from __future__ import annotations

import json

import pytest

import same_outputs

EXPECTED = json.loads(same_outputs.FIXTURE.read_text())


@pytest.fixture(scope="module")
def found(tmp_path_factory):
    return same_outputs.digests(tmp_path_factory.mktemp("same-outputs") / "run")


def test_the_runs_write_the_same_files(found):
    assert sorted(found) == sorted(EXPECTED["files"])


@pytest.mark.parametrize("name", sorted(EXPECTED["files"]))
def test_each_file_reads_the_same(found, name):
    assert found.get(name, {}).get("rounded") == EXPECTED["files"][name]["rounded"], name


@pytest.mark.parametrize("name", sorted(EXPECTED["files"]))
def test_each_file_is_the_same_to_the_byte_where_recorded(found, name):
    here = same_outputs.environment()
    if here != EXPECTED["environment"]:
        pytest.skip(f"recorded on {EXPECTED['environment']}, running on {here}: the rounded digests decide")
    assert found.get(name, {}).get("exact") == EXPECTED["files"][name]["exact"], name


def test_the_masking_masks_only_the_stamps():
    """The per-save stamps are masked, the drawing's content is not (else the digests would prove nothing)."""
    dxf = "\n".join(["  0", "SECTION", "  9", "$TDUPDATE", " 40", "2461012.25", "  9", "$INSUNITS", " 70", "4",
                     "  0", "LWPOLYLINE", "  1", "1.4.5 @ 2026-01-02T03:04:05+00:00", " 10", "12.5"])
    masked = same_outputs.mask_dxf(dxf).split("\n")
    assert masked[5] == "*" and masked[13] == "*"
    assert masked[9] == "4" and masked[15] == "12.5"
    # rounding keeps 9 significant figures: a change in the 8th is seen, one in the 16th is not
    assert same_outputs.rounded("x 0.1234567890123456") == same_outputs.rounded("x 0.1234567890123457")
    assert same_outputs.rounded("x 0.12345678") != same_outputs.rounded("x 0.12345679")
