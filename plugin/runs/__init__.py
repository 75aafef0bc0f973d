"""The runs list: every run kept, labelled by what changed, overlaid or differenced."""
