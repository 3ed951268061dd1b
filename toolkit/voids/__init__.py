"""voids stage (see docs/architecture.md)."""
