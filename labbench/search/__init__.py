"""The cross-validated search: spec and space, the ask/tell runner, storage, events, the winner.

Importing this package is cheap; the submodules load Optuna and numpy when they are used::

    from labbench.search.spec import load_spec
    from labbench.search.runner import SearchRunner

    outcome = SearchRunner(load_spec("orchard.toml"), emit=print).run(threading.Event())
"""
