import pytest


def test_a_rules_cache_key_follows_the_sources_it_calls(monkeypatch):
    """numba's disk cache checks only the file of the function it compiles: the rule's
    cache key must change when a function it calls in another module changes."""
    from allocation import registry
    rule = registry.get_rule("fewest-stops").function
    before = registry._digest(rule)
    monkeypatch.setattr(registry, "_package_sources", lambda: b"an edited callee")
    assert registry._digest(rule) != before


def test_an_unknown_rule_is_named_with_the_nearest_choice_or_none():
    from allocation import registry
    with pytest.raises(ValueError, match="did you mean 'sorted'") as near:
        registry.get_rule("sortd")
    assert "(choices: " in str(near.value) and "fewest-stops" in str(near.value)
    with pytest.raises(ValueError) as far:
        registry.get_rule("qqqqqqqq")
    assert "did you mean" not in str(far.value)
    assert "'qqqqqqqq' is not a known allocation rule (choices: " in str(far.value)


def test_a_contributors_rule_and_policy_are_registered_as_declared(monkeypatch):
    """DEVELOPERS.md, adding a rule: what ``register`` and ``register_policy`` are given is
    what the registry holds, and a policy is offered to the peak simulation by default."""
    from allocation import registry
    monkeypatch.setattr(registry, "RULES", dict(registry.RULES))
    monkeypatch.setattr(registry, "POLICIES", dict(registry.POLICIES))

    def a_rule(origins, destinations, cars, timing, table, scratch, car_out):
        pass

    def a_policy(origin, destination, cars, timing, table, scratch):
        return 0

    registry.register("a-test-rule", summary="One. Two.", source="A test.",
                      max_batch=7)(a_rule)
    rule = registry.get_rule("a-test-rule")
    assert (rule.name, rule.summary, rule.source, rule.function, rule.max_batch) == (
        "a-test-rule", "One. Two.", "A test.", a_rule, 7)
    assert not (rule.baseline or rule.default or rule.peak or rule.allocates)
    registry.register_policy("a-test-policy", summary="One. Two.", source="A policy test.")(
        a_policy)
    policy = registry.get_policy("a-test-policy")
    assert (policy.source, policy.function, policy.peak, policy.headline) == (
        "A policy test.", a_policy, True, False)
    assert "a-test-policy" in registry.peak_controls()
    with pytest.raises(ValueError, match="registered twice"):
        registry.register("a-test-policy", summary="", source="")(a_rule)
