"""helpaware_node: decide when a service robot should ask a nearby person for help, and whom."""
__version__ = "0.1.0"
