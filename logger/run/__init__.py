"""The run folder: its file names and columns, the writer, and the reader (`load_run`)."""
