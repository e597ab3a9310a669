using RewriteProxy.Lanes;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Guard;

public sealed class DraftGuardTests
{
    private static readonly float[] Question = [1, 0, 0];

    private static LaneOptions Lane(OnDrift onDrift = OnDrift.Retry, int retries = 1, GuardMode mode = GuardMode.Enforce) =>
        new() { Name = "draft", Kind = LaneKind.Draft, MaxDrift = 0.5, OnDrift = onDrift, Retries = retries, Mode = mode };

    private static float[] At(double cos) => [(float)cos, (float)Math.Sqrt(1 - cos * cos), 0];

    [Fact]
    public void Draft_within_max_drift_is_accepted_with_its_drift()
    {
        var v = DraftGuard.Judge(Question, At(0.7), "A draft.", Lane());
        Assert.Equal(("A draft.", true, (DropReason?)null), (v.Text, v.Accepted, v.Reason));
        Assert.Equal(0.3, v.Drift, 6);
    }

    [Fact]
    public void Draft_at_exactly_max_drift_is_accepted()
    {
        Assert.True(DraftGuard.Judge(Question, At(0.5), "edge", Lane()).Accepted);
    }

    [Fact]
    public void Draft_beyond_max_drift_is_refused_for_drift()
    {
        var v = DraftGuard.Judge(Question, At(0.3), "Off topic.", Lane());
        Assert.Equal((false, DropReason.Drift), (v.Accepted, v.Reason));
    }

    public static TheoryData<OnDrift, int, int, DraftDecision> Decisions => new()
    {
        { OnDrift.Retry, 1, 1, DraftDecision.Retry },     // first call drifted, one retry allowed
        { OnDrift.Retry, 1, 2, DraftDecision.Fallback },  // the retry drifted too
        { OnDrift.Retry, 2, 2, DraftDecision.Retry },
        { OnDrift.Retry, 2, 3, DraftDecision.Fallback },
        { OnDrift.Retry, 0, 1, DraftDecision.Fallback },  // retry with no retries left behaves as fallback
        { OnDrift.Fallback, 1, 1, DraftDecision.Fallback },
        { OnDrift.Reject, 1, 1, DraftDecision.Reject },
    };

    [Theory]
    [MemberData(nameof(Decisions))]
    public void Drifted_draft_follows_the_lane_policy(OnDrift onDrift, int retries, int attempt, DraftDecision expected)
    {
        var drifted = DraftGuard.Judge(Question, At(0.1), "Off topic.", Lane(onDrift, retries));
        Assert.Equal(expected, DraftGuard.Decide(drifted, attempt, Lane(onDrift, retries)));
    }

    [Theory]
    [InlineData(OnDrift.Retry)]
    [InlineData(OnDrift.Fallback)]
    [InlineData(OnDrift.Reject)]
    public void Accepted_draft_is_accepted_under_every_policy(OnDrift onDrift)
    {
        var ok = DraftGuard.Judge(Question, At(0.9), "On topic.", Lane(onDrift));
        Assert.Equal(DraftDecision.Accept, DraftGuard.Decide(ok, 1, Lane(onDrift)));
    }

    [Fact]
    public void Observe_mode_accepts_a_drifted_draft_but_keeps_the_would_be_verdict()
    {
        var lane = Lane(OnDrift.Reject, mode: GuardMode.Observe);
        var drifted = DraftGuard.Judge(Question, At(0.1), "Off topic.", lane);
        Assert.Equal(DropReason.Drift, drifted.Reason);
        Assert.Equal(DraftDecision.Accept, DraftGuard.Decide(drifted, 1, lane));
    }

    [Fact]
    public void Attempt_below_one_is_refused()
    {
        var v = DraftGuard.Judge(Question, At(0.1), "x", Lane());
        Assert.Throws<ArgumentOutOfRangeException>(() => DraftGuard.Decide(v, 0, Lane()));
    }
}
