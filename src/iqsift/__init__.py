"""iqsift: pull AM-family voice channels out of recorded IQ and real IF captures."""

__version__ = "0.1.0"
