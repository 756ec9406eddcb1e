"""Network transports: thin layers from sockets to protocol.decode to Hub.ingest, and senders."""
