using RewriteProxy.Cache;

namespace RewriteProxy.Tests.Cache;

public sealed class AnchorGuardTests
{
    static readonly AnchorGuard Guard = new();

    [Theory]
    [MemberData(nameof(AnchorGuardCases.Paraphrases), MemberType = typeof(AnchorGuardCases))]
    public void Paraphrase_of_a_cached_question_passes_the_guard(string asked, string cached)
    {
        var verdict = Guard.Compare(asked, cached);
        Assert.True(verdict.Agree, $"refused ({verdict.Reason}: {verdict.Detail})");
        Assert.Null(verdict.Reason);
    }

    [Theory]
    [MemberData(nameof(AnchorGuardCases.NearMisses), MemberType = typeof(AnchorGuardCases))]
    public void Near_miss_of_a_cached_question_is_refused_for_its_reason(string asked, string cached, AnchorReason reason)
    {
        var verdict = Guard.Compare(asked, cached);
        Assert.False(verdict.Agree, "agreed");
        Assert.Equal(reason, verdict.Reason);
        Assert.False(string.IsNullOrEmpty(verdict.Detail));
        // The guard is symmetric: which question is cached must not matter.
        Assert.Equal(verdict.Reason, Guard.Compare(cached, asked).Reason);
    }

    [Fact]
    public void Case_table_has_at_least_forty_pairs_of_both_kinds()
    {
        Assert.True(AnchorGuardCases.All.Count >= 40);
        Assert.True(AnchorGuardCases.All.Count(p => p.IsParaphrase) >= 20);
        Assert.True(AnchorGuardCases.All.Count(p => !p.IsParaphrase) >= 20);
        // Every refusal reason of the guard is exercised by at least one near-miss (the hit decision's own: HitDecisionTests).
        Assert.All(Enum.GetValues<AnchorReason>().Where(r => r <= AnchorReason.Contrast),
            r => Assert.Contains(AnchorGuardCases.All, p => p.Reason == r));
    }

    [Theory]
    [InlineData("Can I bring 5 guests?", "5")]
    [InlineData("Can I bring five guests?", "5")]
    [InlineData("Is the limit 1,000 litres?", "1000")]
    [InlineData("Is the limit one thousand litres?", "1000")]
    [InlineData("Is the limit a thousand litres?", "1000")]
    [InlineData("Does it hold two hundred and fifty bikes?", "250")]
    [InlineData("Does it hold twenty-five bikes?", "25")]
    [InlineData("Is a dozen eggs enough?", "12")]
    [InlineData("Was it 1.5 million visitors?", "1500000")]
    [InlineData("Is the rate 2.50 per hour?", "2.5")]
    [InlineData("Is gate 05 open?", "5")]
    [InlineData("Is the 3rd stop the museum?", "3rd")]
    [InlineData("Is the third stop the museum?", "3rd")]
    [InlineData("Is the twenty-first stop the last?", "21st")]
    [InlineData("Does v1.2.0 fix the leak?", "1.2.0")]
    [InlineData("Does version 1.2.0 fix the leak?", "1.2.0")]
    [InlineData("Is it colder than -5 degrees?", "-5")]
    public void Numbers_are_read_in_canonical_form(string question, string number)
    {
        Assert.Equal([number], Guard.Extract(question).Numbers);
    }

    [Theory]
    [InlineData("Which one is open?")]
    [InlineData("Is no one at the desk?")]
    [InlineData("Is this the one for the ferry?")]
    public void Pronoun_one_is_not_a_number(string question)
    {
        Assert.Empty(Guard.Extract(question).Numbers);
    }

    [Theory]
    [InlineData("Does a 5kg bag fit?", "5 kg")]
    [InlineData("Does a 5 kilogram bag fit?", "5 kg")]
    [InlineData("Is the fee $5?", "5 usd")]
    [InlineData("Is the fee 5 dollars?", "5 usd")]
    [InlineData("Is the fee 5 €?", "5 eur")]
    [InlineData("Is the discount 10%?", "10 %")]
    [InlineData("Is the discount ten per cent?", "10 %")]
    [InlineData("Is the discount 10 percent?", "10 %")]
    [InlineData("Is the pool heated to 28°C?", "28 °c")]
    [InlineData("Does the page load in 200ms?", "200 ms")]
    [InlineData("Does the turbine stop at 25 m/s?", "25 m/s")]
    public void Quantities_keep_their_unit(string question, string quantity)
    {
        Assert.Equal([quantity], Guard.Extract(question).Quantities);
    }

    [Theory]
    [InlineData("Is the gearbox covered?", 0)]
    [InlineData("Is the gearbox not covered?", 1)]
    [InlineData("Isn't the gearbox covered?", 1)]
    [InlineData("Why can't I book, and why won't it load?", 2)]
    [InlineData("Can I enter without a badge?", 1)]
    [InlineData("Are all wards open except the ICU?", 1)]
    [InlineData("Is neither lift working, nor the stairs?", 2)]
    [InlineData("Is No. 5 the right bus?", 0)]
    public void Negations_are_counted(string question, int count)
    {
        Assert.Equal(count, Guard.Extract(question).Negations);
    }

    [Fact]
    public void Negation_count_must_match_not_only_its_parity()
    {
        // Double negatives in English are often emphatic ("I don't need no pass"), so parity would pass them as
        // positive questions; the guard instead asks for the same count and refuses.
        var verdict = Guard.Compare("Don't I need no pass for the pool?", "Do I need a pass for the pool?");
        Assert.Equal(AnchorReason.Negation, verdict.Reason);
    }

    [Theory]
    [InlineData("Does the XR-200 fit?", "xr200")]
    [InlineData("Does the iPhone fit?", "iphone")]
    [InlineData("Is SKU 4471B in stock?", "4471b")]
    [InlineData("Is the HVAC on?", "hvac")]
    [InlineData("Is the pool in Eastbrook open?", "eastbrook")]
    public void Identifiers_are_found(string question, string identifier)
    {
        Assert.Contains(identifier, Guard.Extract(question).Identifiers);
    }

    [Fact]
    public void Identifier_spelling_and_position_do_not_matter()
    {
        Assert.True(Guard.Compare("Does the XR-200 hoist fit the XR200 mount?", "Is the xr200 mount a fit for the XR-200 hoist?").Agree);
        // A name that opens one question and sits mid-sentence in the other is still the same name.
        Assert.True(Guard.Compare("Eastbrook pool: is it open late?", "Is the pool in Eastbrook open late?").Agree);
    }

    [Fact]
    public void Shouted_question_is_not_taken_for_acronyms()
    {
        Assert.True(Guard.Compare("IS THE POOL OPEN TODAY?", "Is the pool open today?").Agree);
    }

    [Fact]
    public void Antonym_pair_present_in_both_questions_is_no_contrast()
    {
        var verdict = Guard.Compare(
            "Is the library open before 9 and closed after 5?", "Before 9 is the library open, and after 5 closed?");
        Assert.True(verdict.Agree, $"{verdict.Reason}: {verdict.Detail}");
    }

    [Theory]
    [InlineData("Are helmets included?", "Are helmets excluded?")]          // regular -ed, WordNet detachment rule
    [InlineData("Is the pool deeper at the far end?", "Is the pool shallower at the far end?")] // comparative -er
    [InlineData("Who won the quiz?", "Who lost the quiz?")]                 // irregular, from WordNet's verb.exc
    [InlineData("Is the water getting better?", "Is the water getting worse?")]
    [InlineData("Were the gates opened at noon?", "Were the gates closed at noon?")]
    public void Inflected_antonyms_are_a_contrast(string asked, string cached)
    {
        Assert.Equal(AnchorReason.Contrast, Guard.Compare(asked, cached).Reason);
    }

    [Fact]
    public void Stored_anchors_compare_like_the_texts_they_came_from()
    {
        var cached = Guard.Extract("What was the wind farm's total energy output in 2022?");
        var asked = Guard.Extract("What was the wind farm's total energy output in 2023?");
        Assert.Equal(Guard.Compare(asked, cached), Guard.Compare(
            "What was the wind farm's total energy output in 2023?", "What was the wind farm's total energy output in 2022?"));
        Assert.Equal(AnchorReason.Number, Guard.Compare(asked, cached).Reason);
    }

    [Fact]
    public void Guard_is_safe_to_share_between_threads()
    {
        var pairs = AnchorGuardCases.All;
        var expected = pairs.Select(p => Guard.Compare(p.Asked, p.Cached)).ToArray();
        var results = new AnchorVerdict[8][];
        Parallel.For(0, results.Length, t => results[t] = pairs.Select(p => Guard.Compare(p.Asked, p.Cached)).ToArray());
        Assert.All(results, r => Assert.Equal(expected, r));
    }

    [Fact]
    public void Empty_question_has_no_anchors()
    {
        var anchors = Guard.Extract("");
        Assert.Empty(anchors.Numbers);
        Assert.Empty(anchors.Identifiers);
        Assert.Equal(0, anchors.Negations);
        Assert.True(Guard.Compare(anchors, Guard.Extract("   ")).Agree);
    }
}
