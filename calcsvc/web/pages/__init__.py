"""The server-rendered review pages: what they share (common), the parts table (parts) and the channel review
(channel), all on one blueprint."""
