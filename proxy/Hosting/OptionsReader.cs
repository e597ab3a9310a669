using System.Globalization;
using System.Text.RegularExpressions;
using Microsoft.Extensions.Configuration;
using RewriteProxy.Admin;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Forwarding;
using RewriteProxy.Guard;
using RewriteProxy.Lanes;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Hosting;

/// <summary>
/// Reads and validates every setting in one pass and reports every bad one, each as a line that names the key,
/// the value and what is allowed. Parsing by hand (instead of the binder) is what makes those lines possible.
/// An absent key takes the default of its options record: the defaults are written there, once.
/// </summary>
public static class OptionsReader
{
    public static (RewriteProxyOptions? Options, IReadOnlyList<string> Errors) Read(IConfiguration config)
    {
        var r = new Reader(config);
        var baseUrl = r.AbsoluteUri("Upstream:BaseUrl");
        var timeout = r.Duration("Upstream:Timeout", UpstreamOptions.DefaultTimeout, positive: true);
        var upstream = baseUrl is null ? null : new UpstreamOptions { BaseUrl = baseUrl, Timeout = timeout };

        StoreOptions storeDefaults = new();
        var provider = r.Choice("Store:Provider", storeDefaults.Provider);
        var storePath = r.String("Store:Path") ?? storeDefaults.Path;
        var store = new StoreOptions
        {
            Provider = provider,
            Path = storePath,
            ConnectionString = r.String("Store:ConnectionString"),
            MaxEntries = r.Long("Store:MaxEntries", storeDefaults.MaxEntries, min: 1),
            Ttl = r.Duration("Store:Ttl", storeDefaults.Ttl, positive: true),
            ClaimWait = r.Duration("Store:ClaimWait", storeDefaults.ClaimWait, positive: true),
            // Empty (not absent) turns snapshots off, so this one key is read as written.
            IndexSnapshotPath = config["Store:IndexSnapshotPath"]?.Trim() ?? StoreOptions.SnapshotPathFor(provider, storePath),
            IndexSnapshotInterval = r.Duration("Store:IndexSnapshotInterval", storeDefaults.IndexSnapshotInterval, positive: true),
        };
        foreach (var problem in StoreFactory.Problems(store)) r.Error(problem);
        EmbeddingOptions embeddingDefaults = new();
        var embedding = new EmbeddingOptions
        {
            ModelPath = r.String("Embedding:ModelPath"),
            VocabPath = r.String("Embedding:VocabPath"),
            Threads = (int)r.Long("Embedding:Threads", embeddingDefaults.Threads, min: 0, max: 256),
            MaxTokens = (int)r.Long("Embedding:MaxTokens", embeddingDefaults.MaxTokens, min: 8, max: 8192),
            CacheSize = (int)r.Long("Embedding:CacheSize", embeddingDefaults.CacheSize, min: 0, max: 10_000_000),
        };
        if ((embedding.ModelPath is null) != (embedding.VocabPath is null))
            r.Error("Embedding:ModelPath / Embedding:VocabPath: set both (another model) or neither (the embedded model)");

        var lanes = new Dictionary<string, LaneOptions>(StringComparer.OrdinalIgnoreCase);
        foreach (var section in config.GetSection("Lanes").GetChildren())
        {
            var lane = ReadLane(r, section.Key);
            if (lane is not null) lanes[section.Key] = lane;
        }

        PartitionOptions partitionDefaults = new();
        var partition = new PartitionOptions
        {
            Mode = r.Choice("Partition", partitionDefaults.Mode),
            Headers = r.HeaderNames("PartitionHeaders"),
        };
        LimitsOptions limitsDefaults = new();
        var limits = new LimitsOptions
        {
            MaxRequestBytes = r.Long("Limits:MaxRequestBytes", limitsDefaults.MaxRequestBytes, min: 1024),
            MaxResponseBytes = r.Long("Limits:MaxResponseBytes", limitsDefaults.MaxResponseBytes, min: 1024),
            MaxPassthroughBytes = r.Long("Limits:MaxPassthroughBytes", limitsDefaults.MaxPassthroughBytes, min: 1024),
            IdleTrimAfter = r.Duration("Limits:IdleTrimAfter", limitsDefaults.IdleTrimAfter, positive: false),
        };
        if (limits.IdleTrimAfter < TimeSpan.Zero) r.Error("Limits:IdleTrimAfter is negative; use 0 to turn the idle trim off");
        var admin = new AdminOptions { Token = r.String("Admin:Token") };
        if (admin.Token is { Length: < 16 })
            r.Error("Admin:Token is shorter than 16 characters; use a long random token (or leave it out to turn the admin API off)");
        EventsOptions eventsDefaults = new();
        var events = new EventsOptions
        {
            Enabled = r.Bool("Events:Enabled", eventsDefaults.Enabled),
            Retention = r.Duration("Events:Retention", eventsDefaults.Retention, positive: true),
            MaxRows = r.Long("Events:MaxRows", eventsDefaults.MaxRows, min: 1),
        };
        var metrics = new MetricsOptions { Port = (int)r.Long("Metrics:Port", new MetricsOptions().Port, min: 0, max: 65535) };

        if (r.Errors.Count > 0 || upstream is null) return (null, r.Errors);
        return (new RewriteProxyOptions
        {
            Upstream = upstream,
            Store = store,
            Embedding = embedding,
            Lanes = lanes,
            Partition = partition,
            Limits = limits,
            Admin = admin,
            Events = events,
            Metrics = metrics,
        }, r.Errors);
    }

    static LaneOptions? ReadLane(Reader r, string name)
    {
        var p = $"Lanes:{name}";
        if (!Regex.IsMatch(name, "^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$"))
            r.Error($"{p}: lane name '{name}' is not allowed; use letters, digits, '-' and '_' (at most 64)");
        var kindText = r.String($"{p}:Kind");
        if (kindText is null)
        {
            r.Error($"{p}:Kind is missing; allowed: draft, siblings");
            return null;
        }
        var kind = r.Choice($"{p}:Kind", LaneKind.Draft);
        var pattern = r.String($"{p}:QuestionPattern");
        Regex? regex = null;
        if (pattern is not null)
        {
            try
            {
                regex = new Regex(pattern, RegexOptions.CultureInvariant | RegexOptions.Singleline, TimeSpan.FromMilliseconds(100));
                if (!regex.GetGroupNames().Contains("q"))
                    r.Error($"{p}:QuestionPattern = '{pattern}' has no named group 'q'; write it as (?<q>...)");
            }
            catch (ArgumentException e)
            {
                r.Error($"{p}:QuestionPattern = '{pattern}' is not a valid .NET regex: {e.Message}");
            }
        }
        // Name and kind decide the defaults (MaxDrift is per kind); the record holds them.
        var defaults = new LaneOptions { Name = name, Kind = kind };
        return defaults with
        {
            HitSimilarity = r.Unit($"{p}:HitSimilarity", defaults.HitSimilarity),
            MaxDrift = r.Double($"{p}:MaxDrift", defaults.MaxDrift, 0, 2),
            MinSpread = r.Unit($"{p}:MinSpread", defaults.MinSpread),
            MaxSiblings = (int)r.Long($"{p}:MaxSiblings", defaults.MaxSiblings, min: 1, max: 100),
            MaxCandidates = (int)r.Long($"{p}:MaxCandidates", defaults.MaxCandidates, min: 1, max: 1000),
            OnDrift = r.Choice($"{p}:OnDrift", defaults.OnDrift),
            Retries = (int)r.Long($"{p}:Retries", defaults.Retries, min: 0, max: 5),
            Mode = r.Choice($"{p}:Mode", defaults.Mode),
            QuestionPattern = regex,
            Candidates = r.Choice($"{p}:Candidates", defaults.Candidates),
        };
    }

    sealed class Reader(IConfiguration config)
    {
        public List<string> Errors { get; } = [];

        public void Error(string line) => Errors.Add(line);

        public string? String(string key)
        {
            var v = config[key];
            return string.IsNullOrWhiteSpace(v) ? null : v.Trim();
        }

        public Uri? AbsoluteUri(string key)
        {
            var v = String(key);
            if (v is null)
            {
                Error($"{key} is missing; set it to the provider's absolute base URL, e.g. https://api.example.com/v1");
                return null;
            }
            if (!Uri.TryCreate(v, UriKind.Absolute, out var uri) || (uri.Scheme != "http" && uri.Scheme != "https"))
            {
                Error($"{key} = '{v}' is not allowed; use an absolute http:// or https:// URL, e.g. https://api.example.com/v1");
                return null;
            }
            if (!string.IsNullOrEmpty(uri.Query) || !string.IsNullOrEmpty(uri.Fragment))
            {
                Error($"{key} = '{v}' is not allowed; a base URL has no query or fragment");
                return null;
            }
            return uri;
        }

        /// <summary>
        /// A list of HTTP header names: a JSON array (<c>Key:0</c>, <c>Key:1</c>, ...) or one comma-separated value,
        /// which is what an environment variable can hold.
        /// </summary>
        public IReadOnlyList<string> HeaderNames(string key)
        {
            var section = config.GetSection(key);
            var values = section.GetChildren().Any()
                ? section.GetChildren().Select(c => c.Value).ToList()
                : [.. (section.Value ?? "").Split(',')];
            var names = new List<string>();
            foreach (var raw in values)
            {
                var name = raw?.Trim() ?? "";
                if (name.Length == 0) continue;
                // RFC 9110 §5.1: a field name is a token.
                if (!Regex.IsMatch(name, @"^[!#$%&'*+\-.^_`|~0-9A-Za-z]+$"))
                    Error($"{key}: '{name}' is not an HTTP header name; use letters, digits and -");
                else names.Add(name);
            }
            return names;
        }

        public double Unit(string key, double fallback) => Double(key, fallback, 0, 1);

        public double Double(string key, double fallback, double min, double max)
        {
            var v = String(key);
            if (v is null) return fallback;
            if (!double.TryParse(v, NumberStyles.Float, CultureInfo.InvariantCulture, out var d) || double.IsNaN(d))
            {
                Error($"{key} = '{v}' is not a number; allowed: {min.ToString(CultureInfo.InvariantCulture)} to {max.ToString(CultureInfo.InvariantCulture)}");
                return fallback;
            }
            if (d < min || d > max)
                Error($"{key} = {v} is outside the allowed range [{min.ToString(CultureInfo.InvariantCulture)}, {max.ToString(CultureInfo.InvariantCulture)}]");
            return d;
        }

        public long Long(string key, long fallback, long min = long.MinValue, long max = long.MaxValue)
        {
            var v = String(key);
            if (v is null) return fallback;
            if (!long.TryParse(v, NumberStyles.Integer, CultureInfo.InvariantCulture, out var n))
            {
                Error($"{key} = '{v}' is not a whole number; allowed: {Range(min, max)}");
                return fallback;
            }
            if (n < min || n > max) Error($"{key} = {v} is not allowed; allowed: {Range(min, max)}");
            return n;
        }

        static string Range(long min, long max) =>
            max == long.MaxValue ? $"{min} or more" : $"{min} to {max}";

        public bool Bool(string key, bool fallback)
        {
            var v = String(key);
            if (v is null) return fallback;
            if (bool.TryParse(v, out var b)) return b;
            Error($"{key} = '{v}' is not allowed; use true or false");
            return fallback;
        }

        /// <summary>A duration as a .NET TimeSpan ("00:01:40", "7.00:00:00") or a number with a unit ("100s", "5m", "12h", "7d").</summary>
        public TimeSpan Duration(string key, TimeSpan fallback, bool positive)
        {
            var v = String(key);
            if (v is null) return fallback;
            if (!DurationText.TryParse(v, out var t))
            {
                Error($"{key} = '{v}' is not a duration; use e.g. 30s, 5m, 12h, 7d or 00:01:40");
                return fallback;
            }
            if (positive && t <= TimeSpan.Zero) Error($"{key} = '{v}' is not allowed; it must be longer than zero");
            return t;
        }

        public T Choice<T>(string key, T fallback) where T : struct, Enum
        {
            var v = String(key);
            if (v is null) return fallback;
            if (Enum.TryParse<T>(v, ignoreCase: true, out var e) && Enum.IsDefined(e) && !v.All(char.IsDigit)) return e;
            var allowed = string.Join(", ", Enum.GetNames<T>().Select(n => n.ToLowerInvariant()));
            Error($"{key} = '{v}' is not allowed; allowed: {allowed}");
            return fallback;
        }
    }
}
