"""Candidate search: every part that may fill a role, through the core in one vectorized pass.

A search holds fixed every input except those one role provides (for a whole channel: several roles), so
the candidates' parameters become numpy columns, one row per candidate (per combination of candidates for
a channel), and go through the same calculation table, completion, validation and core compute as a
single request or a batch. Explicit values still win over every candidate's, as in a single request.

A row the core refuses (physically impossible, e.g. LEDs whose forward voltage exceeds the supply) fails
the pseudo-check ``physically_possible`` with the core's own words; it never fails the search.

Ranking: passing rows first, then failing ones, then refused ones. Passing rows by the least margin over
every check (descending) or by a chosen result; ties by that margin descending, then by the next-least
margin and so on, then by part_id (for a channel: the parts' ids in role order). Failing and refused rows by
margin in the same way (the nearest miss first). A channel's transistor candidates may be of both switch kinds,
each combination judged by its own kind's checks and all ranked together.

Modules: ``common`` (filters, candidates' columns, refusals), ``ranking``, ``role`` and ``channel`` (the searches
themselves, on in-memory ``PartView`` lists, which is also how a benchmark calls them) and ``select`` (a loaded
request: the parts read from the table, the fixed roles resolved, the answer).
"""
