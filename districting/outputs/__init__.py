"""What a plan becomes for people: report tables, zones, colours, exports, the packet, the
options store. Everything here starts from a :class:`districting.study.Outcome`."""
