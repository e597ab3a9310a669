using System.Buffers.Binary;
using System.Text.Json;
using System.Text.Json.Nodes;
using System.Xml.Linq;
using RewriteProxy.Cache;
using RewriteProxy.Cli;
using RewriteProxy.Cli.Reports;
using RewriteProxy.Store;
using RewriteProxy.Tests.Fixtures;
using SkiaSharp;

namespace RewriteProxy.Tests.Cli;

/// <summary>Tests that swap the process-wide Console.Error run one at a time.</summary>
[CollectionDefinition(Name, DisableParallelization = true)]
public sealed class ConsoleCollection
{
    public const string Name = "process console";
}

[Collection(ConsoleCollection.Name)]
public class TuneCommandTests
{
    /// <summary>Drift labels of an invented hospital's visiting rules: on-topic sibling questions (good) and off-topic ones (bad).</summary>
    static readonly (string Question, string Rewrite, string Label)[] VisitingLabels =
    [
        ("When can I visit a patient on the maternity ward?", "What are the visiting hours on the maternity ward?", "good"),
        ("When can I visit a patient on the maternity ward?", "Can partners stay overnight on the maternity ward?", "good"),
        ("When can I visit a patient on the maternity ward?", "How many visitors may a new mother have at once?", "good"),
        ("When can I visit a patient on the maternity ward?", "Where is the hospital car park entrance?", "bad"),
        ("When can I visit a patient on the maternity ward?", "How do I pay a parking fine in the city centre?", "bad"),
        ("Are flowers allowed in the intensive care unit?", "Can I bring flowers to a patient in intensive care?", "good"),
        ("Are flowers allowed in the intensive care unit?", "Why are cut flowers banned on some hospital wards?", "good"),
        ("Are flowers allowed in the intensive care unit?", "Which bus goes to the railway station?", "bad"),
        ("Are flowers allowed in the intensive care unit?", "What is the best soil for growing tulips?", "bad"),
    ];

    static string WriteLabels(string dir, IEnumerable<string> lines)
    {
        var path = Path.Combine(dir, "labels.jsonl");
        File.WriteAllLines(path, lines);
        return path;
    }

    static TuneRequest Request(string lane, string? labels, string outDir, string? store = null) =>
        new(lane, TimeSpan.FromDays(7), labels, outDir, TuneSweep.DefaultMaxFalseHits, TuneSweep.DefaultKeepGood, store);

    static double DrawnShare(SKBitmap b)
    {
        var background = b.Pixels.GroupBy(p => p).MaxBy(g => g.Count())!.Key;
        return b.Pixels.Count(p => p != background) / (double)b.Pixels.Length;
    }

    /// <summary>Pixels whose channels differ by more than 40 of 255: clearly coloured, not a shade of grey.</summary>
    static double ColouredShare(SKBitmap b) =>
        b.Pixels.Count(p => Math.Max(p.Red, Math.Max(p.Green, p.Blue)) - Math.Min(p.Red, Math.Min(p.Green, p.Blue)) > 40) / (double)b.Pixels.Length;

    [Fact]
    public async Task Drift_labels_give_PNG_and_SVG_charts_of_the_configured_size_that_are_not_blank()
    {
        var dir = CliTestKit.NewFolder();
        var labels = WriteLabels(dir, VisitingLabels.Select(l => JsonSerializer.Serialize(new { question = l.Question, rewrite = l.Rewrite, label = l.Label })));
        var (console, text) = CliTestKit.Console80();
        var outDir = Path.Combine(dir, "out");

        var code = await TuneCommand.RunAsync(Request("siblings", labels, outDir), CliTestKit.Options(Path.Combine(dir, "none.db")),
            () => SharedEmbedder.Instance, console, CancellationToken.None);

        Assert.Equal(ExitCodes.Ok, code);
        foreach (var chart in new[] { TuneReport.DriftChart, TuneReport.ScoresChart })
        {
            var png = await File.ReadAllBytesAsync(Path.Combine(outDir, chart + ".png"));
            // PNG (RFC 2083 / ISO 15948): 8-byte signature, then the IHDR chunk first: 4-byte length, "IHDR",
            // width and height as 4-byte big-endian integers at offsets 16 and 20.
            Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A }, png[..8]);
            Assert.Equal("IHDR", System.Text.Encoding.ASCII.GetString(png, 12, 4));
            Assert.Equal(TuneCharts.Width, BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(16, 4)));
            Assert.Equal(TuneCharts.Height, BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(20, 4)));

            using var bitmap = SKBitmap.Decode(png);
            Assert.Equal(TuneCharts.Width, bitmap.Width);
            // Not blank: more pixels differ from the background than on an empty ScottPlot of the same size (axes,
            // grid and tick labels only), and some are in colour: axes, grid and text are grey, the data is not.
            using var empty = SKBitmap.Decode(new ScottPlot.Plot().GetImageBytes(TuneCharts.Width, TuneCharts.Height, ScottPlot.ImageFormat.Png));
            Assert.True(DrawnShare(bitmap) > DrawnShare(empty) + 0.005, $"{chart}: {DrawnShare(bitmap):P1} drawn, an empty plot {DrawnShare(empty):P1}");
            Assert.True(ColouredShare(bitmap) > 0.005, $"{chart}: only {ColouredShare(bitmap):P2} of pixels in colour");
            Assert.True(ColouredShare(empty) < 0.001);

            // SVG 1.1 (W3C): the document element is <svg> in the http://www.w3.org/2000/svg namespace.
            var svg = XDocument.Load(Path.Combine(outDir, chart + ".svg"));
            Assert.Equal(XName.Get("svg", "http://www.w3.org/2000/svg"), svg.Root!.Name);
        }
        var report = await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ReportFile));
        Assert.Contains($"]({TuneReport.DriftChart}.png)", report);
        Assert.Contains($"]({TuneReport.ScoresChart}.png)", report);
        Assert.Contains("9 labelled rewrites", report);
        var snippet = JsonNode.Parse(await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ConfigFile)))!;
        Assert.NotNull(snippet["Lanes"]!["siblings"]!["MaxDrift"]);
        // The console summary names the recommendation, and no line is wider than the 80 columns.
        var output = text.ToString();
        Assert.Contains("recommended MaxDrift", output);
        // Without fonts ScottPlot draws charts with no text at all; the run warns, and this machine must not need to.
        Assert.True(TuneCharts.FontWarning() is null, $"install {TuneCharts.FontPackage}: the chart font cannot draw text");
        Assert.DoesNotContain("no usable font", output);
        Assert.All(output.Split('\n'), line => Assert.True(line.TrimEnd().Length <= 80, line));
    }

    [Fact]
    public async Task Question_pairs_give_the_lowest_hit_similarity_with_and_without_the_anchor_guard()
    {
        var dir = CliTestKit.NewFolder();
        // Invented ferry-line pairs: the year and the number are anchors, so the guard refuses those "differ" pairs.
        string[] lines =
        [
            """{"question":"Which gate does the 7:45 ferry to Port Ellis leave from?","other":"From which gate does the 7:45 ferry to Port Ellis depart?","label":"same"}""",
            """{"question":"How much is a return ticket to Port Ellis?","other":"What does a return ticket to Port Ellis cost?","label":"same"}""",
            """{"question":"What was the ferry timetable in 2023?","other":"What was the ferry timetable in 2024?","label":"differ"}""",
            """{"question":"Can I take 2 bikes on the ferry?","other":"Can I take 4 bikes on the ferry?","label":"differ"}""",
            """{"question":"Is the cafe on the ferry open?","other":"How deep is the harbour at low tide?","label":"differ"}""",
        ];
        var (console, _) = CliTestKit.Console80();
        var outDir = Path.Combine(dir, "out");

        var code = await TuneCommand.RunAsync(Request("siblings", WriteLabels(dir, lines), outDir) with { MaxFalseHits = 0 },
            CliTestKit.Options(Path.Combine(dir, "none.db")), () => SharedEmbedder.Instance, console, CancellationToken.None);

        Assert.Equal(ExitCodes.Ok, code);
        // Recompute the similarities with the same embedder and guard, and find the thresholds by a plain scan.
        var guard = new AnchorGuard();
        var differ = lines.Select(l => JsonNode.Parse(l)!).Where(n => (string)n["label"]! == "differ")
            .Select(n => (Sim: (double)RewriteProxy.Embedding.VectorMath.Cosine(SharedEmbedder.Instance.Embed((string)n["question"]!), SharedEmbedder.Instance.Embed((string)n["other"]!)),
                Agree: guard.Compare((string)n["question"]!, (string)n["other"]!).Agree)).ToList();
        Assert.Contains(differ, d => !d.Agree); // the anchor guard does refuse a differ pair here
        double Lowest(bool withGuard) => TuneSweep.SimilarityThresholds.First(t => differ.All(d => d.Sim < t || (withGuard && !d.Agree)));
        var csv = await File.ReadAllLinesAsync(Path.Combine(outDir, TuneReport.HitRateTable + ".csv"));
        var snippet = JsonNode.Parse(await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ConfigFile)))!;
        Assert.Equal(Lowest(withGuard: true), (double)snippet["Lanes"]!["siblings"]!["HitSimilarity"]!, 9);
        Assert.Equal(1 + TuneSweep.SimilarityThresholds.Count, csv.Length);
        var report = await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ReportFile));
        Assert.Contains($"guard off {Lowest(false):0.00}", report);
        Assert.True(File.Exists(Path.Combine(outDir, TuneReport.SimilarityChart + ".svg")));
    }

    [Fact]
    public async Task Tune_reads_the_event_log_written_through_the_real_store()
    {
        var dir = CliTestKit.NewFolder();
        var path = Path.Combine(dir, "cache.db");
        var now = DateTimeOffset.UtcNow;
        await using (var store = await CliTestKit.OpenStoreAsync(path))
        {
            void Rewrite(string lane, double drift, string verdict, DateTimeOffset at) => store.AppendEvent(new EventRow(at, lane, "p1", "rewrite",
                "How do I report a burst water main?", "Who do I call about a burst pipe?", drift, verdict, verdict == "dropped" ? "drift" : null));
            Rewrite("siblings", 0.21, "accepted", now);
            Rewrite("siblings", 0.48, "accepted", now);
            Rewrite("siblings", 0.63, "accepted", now);
            Rewrite("siblings", 0.81, "dropped", now);
            Rewrite("siblings", 0.77, "dropped", now - TimeSpan.FromDays(3)); // older than --since 2d
            Rewrite("draft", 0.90, "dropped", now); // another lane
            store.AppendEvent(new EventRow(now, "siblings", "p1", "guard", "What was the water bill in 2023?", "What was the water bill in 2024?",
                0.97, "refused", "number"));
            await store.FlushAsync(CancellationToken.None);
        }
        var (console, text) = CliTestKit.Console80();
        var outDir = Path.Combine(dir, "out");

        var code = await TuneCommand.RunAsync(Request("siblings", null, outDir, store: path) with { Since = TimeSpan.FromDays(2) },
            CliTestKit.Options(Path.Combine(dir, "not-this.db")), () => throw new InvalidOperationException("the event log needs no embedder"),
            console, CancellationToken.None);

        Assert.Equal(ExitCodes.Ok, code);
        var csv = await File.ReadAllLinesAsync(Path.Combine(outDir, TuneReport.DropShareTable + ".csv"));
        // By hand, 4 siblings rewrites in the last 2 days (0.21 0.48 0.63 accepted, 0.81 dropped):
        // above 0.45: 0.48 0.63 0.81 -> 3/4; above 0.65: 0.81 -> 1/4.
        Assert.Equal("0.45,3/4,75.0%,2/3,1/1", csv.Single(l => l.StartsWith("0.45,")));
        Assert.Equal("0.65,1/4,25.0%,0/3,1/1", csv.Single(l => l.StartsWith("0.65,")));
        var report = await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ReportFile));
        Assert.Contains("4 rewrite events, 1 guard refusals", report);
        Assert.Contains(path, report);
        Assert.Contains("guard refusals (number)", text.ToString());
        // Without labels nothing is recommended: the snippet repeats the configured MaxDrift.
        var snippet = JsonNode.Parse(await File.ReadAllTextAsync(Path.Combine(outDir, TuneReport.ConfigFile)))!;
        Assert.Equal(0.65, (double)snippet["Lanes"]!["siblings"]!["MaxDrift"]!, 9);
        Assert.True(new FileInfo(Path.Combine(outDir, TuneReport.DriftChart + ".png")).Length > 0);
    }

    [Fact]
    public async Task A_malformed_labels_line_is_reported_with_its_line_number_and_a_failing_exit_code()
    {
        var dir = CliTestKit.NewFolder();
        var labels = WriteLabels(dir,
        [
            """{"question":"Can I bring my dog to the library?","rewrite":"Are pets allowed in the library?","label":"good"}""",
            "",
            """{"question":"Can I renew a book online?","rewrite": """,
        ]);
        var config = Path.Combine(dir, "rewriteproxy.json");
        await File.WriteAllTextAsync(config, """{"Upstream":{"BaseUrl":"http://127.0.0.1:9/v1"},"Lanes":{"siblings":{"Kind":"siblings"}}}""");
        var error = new StringWriter();
        var before = Console.Error;
        Console.SetError(error);
        int code;
        try
        {
            code = await RootCommandFactory.Create()
                .Parse(["tune", "--config", config, "--lane", "siblings", "--labels", labels, "--out", Path.Combine(dir, "out")])
                .InvokeAsync();
        }
        finally
        {
            Console.SetError(before);
        }

        Assert.Equal(ExitCodes.Failed, code);
        Assert.Contains($"{labels}, line 3: not valid JSON", error.ToString());
        Assert.False(Directory.Exists(Path.Combine(dir, "out")));
    }

    [Fact]
    public async Task An_unknown_lane_is_a_configuration_error_that_lists_the_lanes()
    {
        var error = new StringWriter();
        var before = Console.Error;
        Console.SetError(error);
        int code;
        try
        {
            var (console, _) = CliTestKit.Console80();
            code = await TuneCommand.RunAsync(Request("hyde", null, Path.Combine(CliTestKit.NewFolder(), "out")),
                CliTestKit.Options("none.db"), () => SharedEmbedder.Instance, console, CancellationToken.None);
        }
        finally
        {
            Console.SetError(before);
        }
        Assert.Equal(ExitCodes.BadConfiguration, code);
        Assert.Contains("no lane 'hyde' in the configuration (lanes: draft, siblings)", error.ToString());
    }

    [Fact]
    public void Without_a_font_that_draws_Latin_text_the_run_warns_and_names_the_package()
    {
        Assert.Contains($"apt-get install {TuneCharts.FontPackage}", TuneCharts.FontWarning(_ => false));
        Assert.Null(TuneCharts.FontWarning(_ => true));
    }

    [Theory]
    [InlineData("""{"question":"q","rewrite":"r","label":"fine"}""", "line 1: label 'fine' of a rewrite must be \"good\" or \"bad\"")]
    [InlineData("""{"rewrite":"r","label":"good"}""", "line 1: \"question\" (a string) is missing")]
    [InlineData("""[1,2]""", "line 1: expected a JSON object")]
    [InlineData("""{"question":"q","rewrite":"r","other":"o","label":"good"}""", "line 1: give either \"rewrite\"")]
    public void Each_kind_of_bad_labels_line_names_what_is_wrong(string line, string expected)
    {
        var dir = CliTestKit.NewFolder();
        var path = WriteLabels(dir, [line]);
        var e = Assert.Throws<TuneInputException>(() => TuneInput.ParseLabels(path));
        Assert.Contains(expected, e.Message);
    }

    [Fact]
    public void A_labels_file_mixing_rewrites_and_pairs_is_refused_at_the_first_line_of_the_other_kind()
    {
        var path = WriteLabels(CliTestKit.NewFolder(),
        [
            """{"question":"q","rewrite":"r","label":"good"}""",
            """{"question":"q","other":"o","label":"same"}""",
        ]);
        var e = Assert.Throws<TuneInputException>(() => TuneInput.ParseLabels(path));
        Assert.Contains("line 2: this line is a question pair but the file began with rewrite labels", e.Message);
    }
}
