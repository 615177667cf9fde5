"""People on a shared server: roles, acting identities, passwords, secrets, cookies, form tokens, sign-in limits.

Pure helpers with no database or web framework: ``roles`` (the four roles and
what each may do), ``actors`` (who is acting in a service call), ``passwords``
(Argon2id hashing and the password rules), ``keys`` (random secrets, their
digests and the server's signing key), ``cookies`` (signed session cookies),
``csrf`` (form tokens) and ``rate_limit`` (when failed sign-ins lock an
account or an address). The services store and check; the web layer reads
requests and sets cookies.
"""
