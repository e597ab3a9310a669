namespace RewriteProxy.Store.Postgres;

/// <summary>
/// A short circuit breaker: after a failure to reach the database, calls fail at once for a pause instead of each
/// waiting for a timeout; when the pause is over, one call at a time tries again (half-open) until one gets through.
/// The pause doubles with each failed try, from <see cref="FirstPause"/> to <see cref="LongestPause"/>.
/// </summary>
public sealed class PostgresCircuit
{
    /// <summary>First pause after a failure: short, so a database restart costs about a second of uncached calls.</summary>
    public static readonly TimeSpan FirstPause = TimeSpan.FromSeconds(1);

    /// <summary>Longest pause: a database down for long is tried by one call every few seconds, never by every request.</summary>
    public static readonly TimeSpan LongestPause = TimeSpan.FromSeconds(8);

    readonly Lock _gate = new();
    readonly Func<long> _now;
    TimeSpan _pause = TimeSpan.Zero;
    long _closedAgainAt;
    bool _trying;

    /// <param name="now">Milliseconds of a monotonic clock (tests pass their own).</param>
    public PostgresCircuit(Func<long>? now = null) => _now = now ?? (() => Environment.TickCount64);

    /// <summary>True while calls fail fast (the pause after a failure, or another call is trying).</summary>
    public bool IsOpen
    {
        get
        {
            lock (_gate) return _pause > TimeSpan.Zero && (_now() < _closedAgainAt || _trying);
        }
    }

    /// <summary>Whether a call may go to the database now. Every true must be followed by one of the three reports.</summary>
    public bool TryEnter()
    {
        lock (_gate)
        {
            if (_pause == TimeSpan.Zero) return true;
            if (_now() < _closedAgainAt || _trying) return false;
            _trying = true;
            return true;
        }
    }

    /// <summary>The database answered (a result, or an error of the query itself): calls go through again.</summary>
    public void Succeeded()
    {
        lock (_gate)
        {
            _pause = TimeSpan.Zero;
            _trying = false;
        }
    }

    /// <summary>The database could not be reached, or did not answer in time: pause.</summary>
    public void Failed()
    {
        lock (_gate)
        {
            _pause = _pause == TimeSpan.Zero ? FirstPause : TimeSpan.FromTicks(Math.Min(_pause.Ticks * 2, LongestPause.Ticks));
            _closedAgainAt = _now() + (long)_pause.TotalMilliseconds;
            _trying = false;
        }
    }

    /// <summary>The call ended without telling either way (its caller cancelled it): let another try.</summary>
    public void Abandoned()
    {
        lock (_gate) _trying = false;
    }
}
