"""Results database: every run and check of every unit, and the questions asked of them.

``ResultsDB.open(path)`` opens (creating and migrating) a SQLite file; see :mod:`.db` for
writing runs and :mod:`.queries` for history and lot summaries.
"""

from benchgate.store.db import ResultsDB

__all__ = ["ResultsDB"]
