"""The version Backsight writes into every ledger it creates (``meta.writer_version``).

Its own module, so that the store can read it without importing the package's ``__init__``
(which imports the API, which imports the store).
"""

__version__ = "0.1.0"
