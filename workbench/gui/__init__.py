"""The desktop workbench: the only package that imports PySide6 or pyqtgraph."""
