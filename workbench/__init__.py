"""termloom: a terminal workbench for multilingual free-text survey answers.

The import package is ``workbench``; the pipeline lives in ``workbench.core``,
the command line in ``workbench.cli`` and the terminal UI in ``workbench.ui``.
"""

__version__ = "0.1.0"
