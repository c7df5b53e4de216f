"""The shared base under every layer: atomic file writing and thread settings."""
