using RewriteProxy.Lanes;
using RewriteProxy.Guard;
using RewriteProxy.Hosting;

namespace RewriteProxy.Tests.Guard;

/// <summary>The relevance floor of MMR on vectors built by hand, so every cosine is known exactly.</summary>
public sealed class SiblingFloorTests
{
    static LaneOptions Lane(int maxSiblings) =>
        new() { Name = "siblings", Kind = LaneKind.Siblings, MaxDrift = 0.65, MinSpread = 0.05, MaxSiblings = maxSiblings, Mode = GuardMode.Enforce };

    /// <summary>Unit vector at cosine <paramref name="cos"/> to the question (axis 0), the rest split between axes 1 and 2 by <paramref name="turn"/>.</summary>
    static float[] At(double cos, double turn)
    {
        var rest = Math.Sqrt(1 - cos * cos);
        return [(float)cos, (float)(rest * Math.Cos(turn)), (float)(rest * Math.Sin(turn)), 0];
    }

    [Fact]
    public void A_far_diverse_line_is_not_kept_in_place_of_a_near_similar_one()
    {
        // Two near lines (drift 0.20 and 0.22, spread 0.11 apart), one far line pointing elsewhere (drift 0.55).
        // MMR over all three, MaxSiblings 2, prefers the far one for its novelty; the floor (0.45) keeps the near pair.
        float[] question = [1, 0, 0, 0];
        var near1 = At(0.80, 0.0);
        var near2 = At(0.78, 0.8);
        var far = At(0.45, Math.PI);
        string[] texts = ["near one", "near two", "far"];
        var withoutFloor = SiblingGuard.Judge(question, texts, [near1, near2, far], "", Lane(2), SiblingGuard.Relevance, 0.65);
        Assert.Contains("far", withoutFloor.Kept.Select(k => k.Text));

        var judged = SiblingGuard.Judge(question, texts, [near1, near2, far], "", Lane(2));
        Assert.Equal(["near one", "near two"], judged.Kept.Select(k => k.Text));
        Assert.Equal(DropReason.Surplus, Assert.Single(judged.Dropped).Reason);
    }

    [Fact]
    public void Lines_beyond_the_floor_fill_free_places_most_relevant_first()
    {
        float[] question = [1, 0, 0, 0];
        string[] texts = ["near", "farther", "far"];
        var judged = SiblingGuard.Judge(question, texts, [At(0.80, 0), At(0.40, 2.0), At(0.50, 1.0)], "", Lane(3));
        Assert.Equal(["near", "far", "farther"], judged.Kept.Select(k => k.Text));
    }
}
