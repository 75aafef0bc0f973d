"""Long work in worker processes: a job runner with phases, progress, estimates and cancel."""
