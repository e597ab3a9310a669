namespace RewriteProxy.Guard;

/// <summary>What a drifted draft becomes (<c>Lanes:{name}:OnDrift</c>).</summary>
public enum OnDrift { Retry, Fallback, Reject }

/// <summary>Whether the drift guard changes answers (<c>Lanes:{name}:Mode</c>).</summary>
public enum GuardMode { Enforce, Observe }

/// <summary>Which lines of a siblings completion are candidates (<c>Lanes:{name}:Candidates</c>).</summary>
public enum CandidateRule
{
    /// <summary>Only lines that read as a question (end in '?', or open with a question word).</summary>
    Questions,
    /// <summary>Every non-empty line after list markers are stripped.</summary>
    Lines,
}

/// <summary>
/// What the drift guard needs to know of a lane: its thresholds and mode. The lane's options are the one
/// implementation; the guard reads nothing else of them.
/// </summary>
public interface IDriftLimits
{
    /// <summary>Largest drift (1 − cosine to the question) a rewrite may have.</summary>
    double MaxDrift { get; }
    /// <summary>Siblings closer than this (cosine distance) to the question are echoes, and to each other duplicates.</summary>
    double MinSpread { get; }
    /// <summary>Most siblings kept.</summary>
    int MaxSiblings { get; }
    /// <summary>What a drifted draft becomes.</summary>
    OnDrift OnDrift { get; }
    /// <summary>Upstream calls after the first when <see cref="OnDrift"/> is <c>retry</c>.</summary>
    int Retries { get; }
    /// <summary>Enforce drops drifted rewrites; observe only measures.</summary>
    GuardMode Mode { get; }
}
