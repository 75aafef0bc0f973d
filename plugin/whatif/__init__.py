"""Live what-if: after a run, schedule edits update the curves at once from the case's reduced model."""
