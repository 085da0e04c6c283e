"""couplint: find coupling between aggressor and victim nets in PCB geometry."""

__version__ = "0.1.0"
