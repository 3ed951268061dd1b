"""optimize stage (see docs/architecture.md)."""
