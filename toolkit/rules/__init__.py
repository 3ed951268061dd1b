"""rules stage (see docs/architecture.md)."""
