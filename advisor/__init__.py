"""advisor — before a high-frequency session: scan the reflector, measure it astronomically, or postpone."""

__version__ = "0.1.0"
