"""Opening files: the data folder's file list and uploads, reading a mesh or case into the
panel, and the question before unsaved changes are replaced."""
