"""Robot-side senders: small, dependency-free files that robot code copies in."""
