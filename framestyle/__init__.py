"""framestyle: temporally stable neural style transfer for shots and clips on a CPU."""

__version__ = "0.1.0"
