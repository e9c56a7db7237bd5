"""The shared nouns: the words and readers every layer of benchgate agrees on.

The bottom layer of the house (``docs`` and DEVELOPERS.md, "The house"): it imports nothing of
benchgate except :mod:`benchgate.errors` (the error hierarchy, which belongs to this layer too),
and any layer may import it.

- :mod:`.names`: measurement names and units, reading sources, instrument roles;
- :mod:`.bounds`: the values each measurement or reading can physically take;
- :mod:`.yamlpos`: the safe YAML reader that keeps line and column of every value;
- :mod:`.fields`: reading typed fields out of that tree, every error with its place;
- :mod:`.evidence`: habits of writing evidence (atomic writes, SHA-256, UTC time, JSON-safe values).
"""
