"""Password rules and Argon2id hashing."""

from __future__ import annotations

from app.auth.passwords import MAX_LENGTH, Hasher, password_problems

FAST = Hasher(time_cost=1, memory_kib=8)


def test_a_long_enough_password_that_is_not_the_name_is_accepted() -> None:
    assert password_problems("four unrelated words", name="anna") == []


def test_short_long_blank_and_name_passwords_are_refused_with_reasons() -> None:
    assert password_problems("short", name="anna") == ["the password must have at least 10 characters"]
    assert "at most" in password_problems("x" * (MAX_LENGTH + 1), name="anna")[0]
    assert password_problems(" " * 12, name="anna") == ["the password must not be only spaces"]
    assert password_problems("Anna.Lindqvist", name="anna.lindqvist") == ["the password must not be the account name"]


def test_hashes_are_argon2id_salted_and_verify_only_the_right_password() -> None:
    first, second = FAST.hash("correct horse"), FAST.hash("correct horse")
    assert first.startswith("$argon2id$") and first != second
    assert FAST.verify(first, "correct horse")
    assert not FAST.verify(first, "correct horsE")


def test_a_missing_or_broken_hash_never_verifies() -> None:
    assert not FAST.verify(None, "anything at all")
    assert not FAST.verify("not a hash", "anything at all")
    assert not FAST.verify(FAST.hash("x" * 20), "x" * (MAX_LENGTH + 1))


def test_hashes_made_with_other_work_factors_are_upgraded() -> None:
    stronger = Hasher(time_cost=2, memory_kib=16)
    assert stronger.needs_rehash(FAST.hash("correct horse"))
    assert not FAST.needs_rehash(FAST.hash("correct horse"))
