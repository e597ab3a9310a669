using System.Diagnostics;
using System.IO.Compression;
using RewriteProxy.Cache;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// The hit decision on single pairs (invented questions unless a line names WordNet 3.0 as the source), and the
/// embedded word senses against WordNet itself. Similarity is given: these pairs test what changed, not how near.
/// </summary>
public sealed class HitDecisionTests
{
    static readonly HitDecision Decision = new(new AnchorGuard());

    static void Serves(string asked, string cached) =>
        Assert.True(Decision.Decide(asked, cached, 0.9).Agree, $"refused: {Decision.Decide(asked, cached, 0.9)}");

    static void Refuses(string asked, string cached, AnchorReason reason)
    {
        var verdict = Decision.Decide(asked, cached, 0.9);
        Assert.False(verdict.Agree, $"served: {asked} / {cached}");
        Assert.Equal(reason, verdict.Reason);
        // The same decision with the questions the other way round.
        Assert.Equal(reason, Decision.Decide(cached, asked, 0.9).Reason);
    }

    [Theory]
    // WordNet 3.0 synset {postpone, prorogue, hold over, put over, table, shelve, set back, defer, remit, put off}.
    [InlineData("Can I postpone my final exam if I am ill?", "Can I defer my final exam if I am ill?")]
    // WordNet 3.0 derivationally related forms ('+' pointer): reimburse / reimbursement.
    [InlineData("When do I get the reimbursement for my travel costs?", "When do you reimburse my travel costs?")]
    [InlineData("When does the gym open on bank holidays?", "What time does the gym open on bank holidays?")]
    [InlineData("Who marks the second-year history dissertations?", "By whom are the second-year history dissertations marked?")]
    [InlineData("If I miss the last tram, is my ticket valid on the night bus?", "Is my ticket valid on the night bus if I miss the last tram?")]
    [InlineData("Is my pension paid into my bank or building society account?", "Is my pension paid into my building society or bank account?")]
    [InlineData("How do I get my HR contact to update my pay grade?", "How do I get my human resources contact to update my pay grade?")]
    [InlineData("Do I need a photo ID to buy a senior pass?", "Do I need photo identification to buy a senior pass?")]
    [InlineData("When are payslips emailed to employees?", "When does the company email payslips to employees?")]
    [InlineData("Why is my dog required to wear a cone after surgery?", "For what reason does my dog have to wear a cone after surgery?")]
    public void A_rewording_with_the_same_meaning_is_served(string asked, string cached) => Serves(asked, cached);

    [Theory]
    [InlineData("Do diesel cars have to be returned with a full tank?", "Do petrol cars have to be returned with a full tank?")]
    [InlineData("How do I pause my membership from the app?", "How do I resume my membership from the app?")]
    [InlineData("How do I opt in to the salary sacrifice pension scheme?", "How do I opt out of the salary sacrifice pension scheme?")]
    [InlineData("Is the Christmas bonus paid to all employees?", "Is the Christmas bonus paid only to permanent employees?")]
    // "per" is a preposition, not an abbreviation of "person".
    [InlineData("Is the parking permit issued per person?", "Is the parking permit issued per household?")]
    public void A_changed_word_without_a_shared_sense_is_refused_by_the_combiner(string asked, string cached) =>
        Refuses(asked, cached, AnchorReason.Learned);

    [Theory]
    [InlineData("Is the cycle-to-work deduction taken monthly from my salary?", "Is the cycle-to-work deduction taken annually from my salary?")]
    [InlineData("How much overtime did my team log this quarter?", "How much overtime did my team log last quarter?")]
    [InlineData("Was the pension increase applied this April?", "Was the pension increase applied last April?")]
    [InlineData("Can I claim a meal allowance of £12 per day?", "Can I claim a meal allowance of £12 per meal?")]
    [InlineData("Are bikes allowed on trams on weekday mornings?", "Are bikes allowed on trams on weekday evenings?")]
    public void Another_time_frame_is_refused(string asked, string cached) => Refuses(asked, cached, AnchorReason.TimeFrame);

    [Theory]
    [InlineData("Is the student rate available to anyone over 25 in full-time study?", "Is the student rate available to anyone under 25 in full-time study?")]
    [InlineData("Do I repay the relocation costs if I leave within 12 months?", "Do I repay the relocation costs if I leave after 12 months?")]
    [InlineData("Can I book a class up to 7 days ahead?", "Can I book a class from 7 days ahead?")]
    public void A_comparator_the_other_way_is_refused(string asked, string cached) => Refuses(asked, cached, AnchorReason.Comparator);

    [Theory]
    [InlineData("Can I cancel my contract early unless I move house?", "Can I cancel my contract early if I move house?")]
    [InlineData("What if my dog fails to pass the blood test?", "What if my dog passes the blood test?")]
    [InlineData("Is the bike covered if it is missing a lock?", "Is the bike covered if it is fitted with a lock?")]
    public void An_implicit_negation_in_one_question_only_is_refused(string asked, string cached) => Refuses(asked, cached, AnchorReason.Negation);

    [Fact]
    public void Obligation_against_permission_is_refused() => Refuses("Can I bring a towel?", "Must I bring a towel?", AnchorReason.Obligation);

    [Theory]
    [InlineData("Does the renter reimburse the company for a parking fine?", "Does the company reimburse the renter for a parking fine?")]
    [InlineData("Can a companion pass holder bring a carer along for free?", "Can a carer bring a companion pass holder along for free?")]
    [InlineData("Does my line manager need to approve my timesheet before payroll does?", "Does payroll need to approve my timesheet before my line manager does?")]
    // "need" acts between the two parts even though obligation words are ignored in the substitution check.
    [InlineData("Does the tenant need the landlord's consent to sublet?", "Does the landlord need the tenant's consent to sublet?")]
    // A pronoun that changes case as the parts trade places.
    [InlineData("Does my manager have to tell me before changing my shifts?", "Do I have to tell my manager before changing my shifts?")]
    public void Parts_that_trade_places_are_refused_as_role(string asked, string cached) => Refuses(asked, cached, AnchorReason.Role);

    [Theory]
    [InlineData("Can I buy a three-day tourist pass at the airport?", "Can I buy a seven-day tourist pass at the airport?")]
    [InlineData("Is the induction a one-hour session?", "Is the induction a two-hour session?")]
    [InlineData("Can two people share a 10-trip card?", "Can two people share a 12-trip card?")]
    public void Hyphenated_counts_are_numbers(string asked, string cached) => Refuses(asked, cached, AnchorReason.Number);

    [Fact]
    public void A_hyphenated_count_matches_its_digits() => Serves("Can 2 people share a ten-trip card?", "Can two people share a 10-trip card?");

    [Fact]
    public void One_standing_for_a_thing_is_not_a_count() =>
        Serves("Can I bring my own towel or do I have to rent one at reception?", "Do I have to rent a towel at reception, or can I bring my own?");

    [Fact]
    public void Every_refusal_reason_is_a_fixed_metric_label() =>
        Assert.Equal(["negation", "number", "unit", "identifier", "contrast", "time_frame", "comparator", "obligation", "role", "learned"],
            LabelValue.All<AnchorReason>());

    // ---- the embedded word senses against WordNet 3.0 ----

    const string WordNetDir = "/usr/share/wordnet";
    const string SensesPath = "proxy/Cache/Resources/senses.tsv.gz";
    const string Generator = "scripts/wordnet-senses.py";

    [Fact]
    public async Task Embedded_senses_equal_what_the_script_generates_from_WordNet()
    {
        if (!File.Exists(Path.Combine(WordNetDir, "index.noun")))
            Assert.Fail($"WordNet 3.0 is not installed at {WordNetDir}: run scripts/test.sh, which installs the Debian package wordnet-base.");
        var root = RepositoryRoot();
        var start = new ProcessStartInfo("python3", [Generator, "--wordnet", WordNetDir])
        {
            WorkingDirectory = root, RedirectStandardOutput = true, RedirectStandardError = true,
        };
        using var process = Process.Start(start)!;
        var reading = process.StandardOutput.ReadToEndAsync();
        var stderr = await process.StandardError.ReadToEndAsync();
        var generated = await reading;
        await process.WaitForExitAsync();
        Assert.True(process.ExitCode == 0, $"{Generator} failed: {stderr}");
        Assert.True(generated == Unzip(File.OpenRead(Path.Combine(root, SensesPath))), $"{SensesPath} is stale: run {Generator} --out {SensesPath}");
        using var embedded = typeof(HitDecision).Assembly.GetManifestResourceStream(WordSenses.ResourceName)!;
        Assert.Equal(generated, Unzip(embedded));
    }

    [Theory]
    [InlineData("postpone", "defer", true)]      // WordNet 3.0 synset, first verb sense of "postpone"
    [InlineData("reimburse", "reimbursement", true)] // WordNet 3.0 derivation pointer
    [InlineData("employee", "employer", false)]  // both derive from "employ", not from each other
    [InlineData("board", "card", false)]         // share only rare senses (8th and 11th noun senses)
    [InlineData("diesel", "petrol", false)]
    public void Word_senses_as_WordNet_has_them(string a, string b, bool same) => Assert.Equal(same, WordSenses.Default.SameSense(a, b));

    static string Unzip(Stream stream)
    {
        using (stream)
        using (var unzip = new GZipStream(stream, CompressionMode.Decompress))
        using (var reader = new StreamReader(unzip))
            return reader.ReadToEnd();
    }

    static string RepositoryRoot()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
            if (File.Exists(Path.Combine(dir.FullName, "RewriteProxy.sln"))) return dir.FullName;
        throw new InvalidOperationException("RewriteProxy.sln not found above the test binaries");
    }
}
