"""Team mode: a shared Bendline server inside an agency network.

Sign-in accounts and tokens (:mod:`app.team.users`), fits as Celery tasks
(:mod:`app.team.tasks`), with Redis as broker and run store
(:mod:`app.store.redis_store`).
"""
