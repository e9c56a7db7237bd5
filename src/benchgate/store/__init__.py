"""Results database: every run and check of every unit, and the questions asked of them.

``ResultsDB.open(target)`` opens (creating and migrating) a SQLite file or a PostgreSQL database
(``postgresql://`` URL); :func:`open_results` opens "the results database" a command was told to
use (option, environment, station file, default). See :mod:`.db` for writing runs,
:mod:`.queries` for history and lot summaries, :mod:`.forward` for stations that send their runs
to a central database.
"""

from benchgate.store.db import ResultsDB
from benchgate.store.setting import ENV_VAR, open_results, resolve

__all__ = ["ENV_VAR", "ResultsDB", "open_results", "resolve"]
