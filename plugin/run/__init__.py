"""Running the set-up: the background run, its progress and cancelling."""
