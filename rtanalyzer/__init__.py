"""rtanalyzer: sound-card instrument for aligning and proving SSB exciters."""

__version__ = "0.1.0"
