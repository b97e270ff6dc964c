"""Required safe egress time (RSET) by the hand method.

Time distributions for human response (``distributions``), detector and sprinkler
response to a fire's gas history (``detection``), the hydraulic movement model
(``movement``) and the sum of the phases (``rset``). Pure functions on plain floats
and numpy arrays in internal units (s, m, degC, m/s, persons); no I/O.
"""
