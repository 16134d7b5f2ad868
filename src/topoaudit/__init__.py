"""topoaudit."""
