"""The modules the pool's fork server imports once, so that every worker forks ready to fit."""

WARM_MODULES = ("service.runtime.warmup",)
