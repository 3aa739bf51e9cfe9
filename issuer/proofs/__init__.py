"""Pure proofs over the log: the Merkle tree of RFC 6962 (``merkle``) and the signed
statements about it (``statements``: checkpoints and receipts, their text and checking).
Values in, values out: no database, clock or terminal."""
