"""The model assistant: from a start model to a better one by measured out-of-sample gains.

- :mod:`.guards`: columns never proposed (the price and what is computed from it,
  identifiers, raw dates; protected characteristics and their proxies), with reasons.
- :mod:`.candidates`: the terms proposed from the columns and the current model.
- :mod:`.update`: cross-validated errors of a changed model from one decomposition.
- :mod:`.search`: the stepwise search, its one-standard-error stopping rule, the line
  cap and the honest hold-out estimate.
- :mod:`.proposal`: the proposed model file, one comment per line with its measured gain.
"""
