"""Accounts, sessions, roles and CSRF for a team on the office LAN.

* :mod:`.roles` — the three roles and what each may do (one table, :data:`~.roles.GRANTS`);
* :mod:`.passwords` — Argon2 hashing (argon2-cffi); passwords are never logged or stored plain;
* :mod:`.accounts` — users and signed-in sessions in the database;
* :mod:`.ratelimit` — failed-login limits per user name and per address (in memory);
* :mod:`.middleware` — resolves the session cookie to a user for every request;
* :mod:`.permissions` — the dependency every route declares (``Require``), which also checks CSRF.
"""
