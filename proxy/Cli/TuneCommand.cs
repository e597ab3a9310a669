using System.CommandLine;
using System.Diagnostics;
using System.Globalization;
using RewriteProxy.Cli.Reports;
using RewriteProxy.Embedding;
using RewriteProxy.Store;
using Spectre.Console;

namespace RewriteProxy.Cli;

/// <summary>What one <c>tune</c> run was asked to do.</summary>
/// <param name="Lane">A key of <c>Lanes</c>.</param>
/// <param name="Since">How far back the event log is read (ignored with a labels file).</param>
/// <param name="Labels">A labelled JSONL instead of the event log.</param>
/// <param name="OutDir">Where the report goes; null = <c>tune-{lane}-{yyyyMMdd-HHmmss}</c>.</param>
/// <param name="MaxFalseHits">Target share of differ pairs that may hit.</param>
/// <param name="KeepGood">Share of good rewrites a recommended MaxDrift must keep.</param>
/// <param name="StorePath">Overrides Store:Path.</param>
public sealed record TuneRequest(string Lane, TimeSpan Since, string? Labels, string? OutDir, double MaxFalseHits, double KeepGood,
    string? StorePath);

/// <summary>
/// <c>rewriteproxy tune --lane NAME</c>: measures what each candidate MaxDrift (and, with question pairs, HitSimilarity)
/// would do on the event log or on a labelled file, and writes charts, tables, a config snippet and report.md.
/// </summary>
public static class TuneCommand
{
    /// <summary>Default look-back over the event log: the default Events:Retention, i.e. everything kept.</summary>
    static readonly TimeSpan DefaultSince = TimeSpan.FromDays(7);

    static readonly Option<string> Lane = new("--lane") { Description = "Lane to tune (a key of Lanes).", Required = true };
    static readonly Option<string?> Since = new("--since") { Description = "Read events this far back, e.g. 12h or 7d (default 7d)." };
    static readonly Option<string?> Labels = new("--labels")
    {
        Description = "Labelled JSONL instead of the event log: {\"question\",\"rewrite\",\"label\":\"good|bad\"} lines " +
            "(drift) or {\"question\",\"other\",\"label\":\"same|differ\"} lines (hit threshold).",
    };
    static readonly Option<string?> Out = new("--out") { Description = "Output folder (default tune-<lane>-<yyyyMMdd-HHmmss>)." };
    static readonly Option<string?> Store = new("--store") { Description = "The store's file; overrides Store:Path." };
    static readonly Option<double> MaxFalseHits = new("--max-false-hits")
    {
        Description = "Target share of differ pairs that may hit (question pairs).",
        DefaultValueFactory = _ => TuneSweep.DefaultMaxFalseHits,
    };
    static readonly Option<double> KeepGood = new("--keep-good")
    {
        Description = "Share of good rewrites a recommended MaxDrift must keep (drift labels).",
        DefaultValueFactory = _ => TuneSweep.DefaultKeepGood,
    };

    public static Command Create()
    {
        var command = new Command("tune", "Measure candidate thresholds of a lane on the event log or a labelled file; write a report.")
        {
            Lane, Since, Labels, Out, Store, MaxFalseHits, KeepGood,
        };
        command.TreatUnmatchedTokensAsErrors = false;
        command.SetAction(async (parse, cancel) =>
        {
            if (!Startup.TryLoad(parse, out var options, out _)) return ExitCodes.BadConfiguration;
            var sinceText = parse.GetValue(Since);
            var since = DefaultSince;
            if (sinceText is not null && (!DurationText.TryParse(sinceText, out since) || since <= TimeSpan.Zero))
            {
                Console.Error.WriteLine($"rewriteproxy: tune: --since '{sinceText}' is not a duration; use e.g. 12h or 7d");
                return ExitCodes.BadConfiguration;
            }
            var request = new TuneRequest(parse.GetValue(Lane)!, since, parse.GetValue(Labels), parse.GetValue(Out),
                parse.GetValue(MaxFalseHits), parse.GetValue(KeepGood), parse.GetValue(Store));
            IEmbedder? loaded = null;
            try
            {
                return await RunAsync(request, options, () => loaded = OnnxEmbedder.Load(options.Embedding), AnsiConsole.Console, cancel);
            }
            finally
            {
                (loaded as IDisposable)?.Dispose();
            }
        });
        return command;
    }

    /// <summary>Runs tune with an embedder made on demand (only labels files need one); errors go to stderr as one line.</summary>
    /// <param name="request">What to tune.</param>
    /// <param name="options">The configuration (lanes, Store:*).</param>
    /// <param name="embedder">Makes the embedder, only when a labels file needs one.</param>
    /// <param name="console">Where the summary goes.</param>
    /// <param name="cancel">Stops the run.</param>
    /// <param name="store">An open store to read the event log from (the demo's); null opens the configured store read-only.</param>
    public static async Task<int> RunAsync(TuneRequest request, RewriteProxyOptions options, Func<IEmbedder> embedder,
        IAnsiConsole console, CancellationToken cancel, IRewriteStore? store = null)
    {
        if (!options.Lanes.TryGetValue(request.Lane, out var lane))
        {
            Console.Error.WriteLine($"rewriteproxy: tune: no lane '{request.Lane}' in the configuration (lanes: " +
                $"{(options.Lanes.Count == 0 ? "none" : string.Join(", ", options.Lanes.Keys.Order()))})");
            return ExitCodes.BadConfiguration;
        }
        if (request.MaxFalseHits is < 0 or > 1 || request.KeepGood is < 0 or > 1)
        {
            Console.Error.WriteLine("rewriteproxy: tune: --max-false-hits and --keep-good are shares between 0 and 1");
            return ExitCodes.BadConfiguration;
        }
        var now = DateTimeOffset.UtcNow;
        var clock = Stopwatch.StartNew();
        TuneData data;
        try
        {
            data = request.Labels is null
                ? await ReadEventsAsync(store, request.StorePath is { } path ? options.Store with { Path = path } : options.Store, lane.Name,
                    now - request.Since, cancel)
                : await ScoreLabelsAsync(request.Labels, embedder, console, cancel);
        }
        catch (Exception e) when (e is TuneInputException or StoreException)
        {
            Console.Error.WriteLine($"rewriteproxy: tune: {e.Message}");
            return ExitCodes.Failed;
        }
        catch (EmbedderLoadException e)
        {
            Console.Error.WriteLine($"rewriteproxy: tune: {e.Message}");
            return ExitCodes.BadConfiguration;
        }
        var report = TuneReport.Build(lane.Name, lane, data, request.KeepGood, request.MaxFalseHits, now);
        var dir = request.OutDir ?? $"tune-{lane.Name}-{now.UtcDateTime.ToString("yyyyMMdd-HHmmss", CultureInfo.InvariantCulture)}";
        if (TuneCharts.FontWarning() is { } warning) console.MarkupLineInterpolated($"[yellow]warning: {warning}[/]");
        IReadOnlyList<string> files = [];
        await console.Status().StartAsync("Drawing charts and writing the report…", _ =>
        {
            files = report.Write(dir);
            return Task.CompletedTask;
        });
        console.Write(report.Summary().ToConsole());
        if (report.DropShares.Count > 0) console.Write(report.DropShareTableOf().ToConsole());
        if (report.DropScores.Count > 0) console.Write(report.DropScoreTableOf().ToConsole());
        if (report.HitRates.Count > 0) console.Write(report.HitRateTableOf(every: 5).ToConsole());
        if (data.Drifts.Count == 0 && data.Pairs.Count == 0)
            console.MarkupLine("[yellow]No data: nothing was measured; the snippet repeats the configured values.[/]");
        console.MarkupLineInterpolated($"Wrote {files.Count} files to [bold]{Path.GetFullPath(dir)}[/] in {clock.Elapsed.TotalSeconds:0.0} s (report: {TuneReport.ReportFile}).");
        return ExitCodes.Ok;
    }

    static async Task<TuneData> ReadEventsAsync(IRewriteStore? open, StoreOptions options, string lane, DateTimeOffset since,
        CancellationToken cancel)
    {
        if (open is not null) return await TuneInput.ReadEventsAsync(open, lane, since, cancel);
        await using var store = await CliStore.OpenAsync(options, StoreAccess.ReadOnly, cancel);
        return await TuneInput.ReadEventsAsync(store, lane, since, cancel);
    }

    static async Task<TuneData> ScoreLabelsAsync(string path, Func<IEmbedder> makeEmbedder, IAnsiConsole console, CancellationToken cancel)
    {
        var (kind, lines) = TuneInput.ParseLabels(path);
        IEmbedder embedder = null!;
        await console.Status().StartAsync("Loading the embedding model…", _ =>
        {
            embedder = makeEmbedder();
            return Task.CompletedTask;
        });
        TuneData data = null!;
        await console.Progress().Columns(new TaskDescriptionColumn(), new ProgressBarColumn(), new PercentageColumn(),
                new RemainingTimeColumn())
            .StartAsync(async ctx =>
            {
                var task = ctx.AddTask($"Embedding {lines.Count} labelled lines", maxValue: lines.Count);
                data = await Task.Run(() => TuneInput.Score(path, kind, lines, embedder, done => task.Value = done, cancel), cancel);
            });
        return data;
    }
}
