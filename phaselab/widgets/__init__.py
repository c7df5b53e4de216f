"""The notebook explorer: ipywidgets and bokeh views of a system's phase space, fed by a worker thread."""
