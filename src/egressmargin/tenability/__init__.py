"""Tenability formulas: pure functions of numpy arrays in documented internal units.

One module per criterion family (``toxicity``, ``heat``, ``visibility``, ``layer``) plus
``crossing`` for dose integration and first-crossing search. Nothing here reads files,
prints or uses pint; units are converted at the edges of the program.
"""
