"""The demo: an invented hospital night shift, through the core alone or the node as a process."""
