from labbench.cli import entry

entry()
