"""labelq: choose which candidates to label next with a Gaussian-process classifier."""

__version__ = "0.1.0"
