

def test_a_rules_cache_key_follows_the_sources_it_calls(monkeypatch):
    """numba's disk cache checks only the file of the function it compiles: the rule's
    cache key must change when a function it calls in another module changes."""
    from allocation import registry
    rule = registry.get_rule("fewest-stops").function
    before = registry._digest(rule)
    monkeypatch.setattr(registry, "_package_sources", lambda: b"an edited callee")
    assert registry._digest(rule) != before
