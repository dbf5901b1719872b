"""Sources of readings: bytes, ports, sockets and files turned into batches; no physics here."""
