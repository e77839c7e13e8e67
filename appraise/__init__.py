"""appraise: value a subject property from comparable sales with a hedonic regression."""

__version__ = "0.1.0"
