"""Formats: what arrives and what is kept -- lines, reading decoders, bridge frames, recordings."""
