"""The version of seqgen: a leaf, so any module can name it without importing the package face."""

__version__ = "0.1.0"
