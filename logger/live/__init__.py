"""Live: the pipeline every source drives, capture, replay, and the listeners that watch a run."""
