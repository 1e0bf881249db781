"""Bytes to events: protocol v1 (PROTOCOL.md), its decoder and encoder, and the serial link.

Imports neither `processing` nor `tui`. Start with `protocol.decoder.Decoder` (pure) or
`protocol.link.Link` (a port or URL, read on its own thread); the events are in `protocol.events`.
"""
