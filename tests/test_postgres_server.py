"""The PostgreSQL server the database tests use is real and answers (runs in CI, never skipped)."""

from __future__ import annotations


def test_postgres_server_answers(postgres_url):
    import sqlalchemy as sa

    engine = sa.create_engine(postgres_url)
    with engine.connect() as conn:
        version = conn.execute(sa.text("select version()")).scalar_one()
    engine.dispose()
    assert version.startswith("PostgreSQL")
