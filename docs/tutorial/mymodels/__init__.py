"""Your own model functions for zetascan's plug-in mechanism (tutorial example)."""
