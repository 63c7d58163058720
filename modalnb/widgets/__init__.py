"""Notebook widgets: the only part of modalnb that imports ipywidgets and plotly."""
