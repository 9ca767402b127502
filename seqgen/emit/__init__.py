"""Stage 6: writers for build folders (manifest, CSV and .npz channel tables)."""
