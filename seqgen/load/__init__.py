"""Stage 1: read YAML files into plain data plus a map of source positions."""
from .yamlsrc import Document, LoadError, load_file, load_text  # noqa: F401
