"""Results: diagnostics, the hedge report, its Markdown and JSON forms, and the cautions."""
