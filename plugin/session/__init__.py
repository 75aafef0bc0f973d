"""Who edits the workspace: the first browser tab owns it, later ones watch or take over."""
