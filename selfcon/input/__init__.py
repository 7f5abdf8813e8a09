"""Stage 1, input: what the user wrote, validated.

Owns the deck schema and its validation (:mod:`selfcon.input.deck`: TOML -> frozen
``Deck``, every error located by file, line and key; ``--set`` overrides; the deck
reference) and the material library (:mod:`selfcon.input.materials`: every value with
its source, alloy and temperature rules, deck-local materials).

May import: the foundation modules ``selfcon.constants``, ``selfcon.errors`` and
``selfcon.version`` only.  Nothing here knows meshes, solvers or files of results.
"""
