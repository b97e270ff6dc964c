"""egressmargin: compare available and required safe egress times with model uncertainty."""

__version__ = "0.3.0"
