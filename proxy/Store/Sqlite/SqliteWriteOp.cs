namespace RewriteProxy.Store.Sqlite;

/// <summary>One operation queued for the store's writer; those that a caller waits on complete once committed.</summary>
internal abstract class WriteOp
{
    public virtual void Complete() { }
    public virtual void Fail(Exception e) { }

    public sealed class Insert(NewEntry entry) : WriteOp
    {
        public NewEntry Entry { get; } = entry;
        public long Id;
        public TaskCompletionSource<long> Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
        public override void Complete() => Result.TrySetResult(Id);
        public override void Fail(Exception e) => Result.TrySetException(e);
    }

    /// <summary>Nothing to do but wake the writer (pending tallies).</summary>
    public sealed class Wake : WriteOp
    {
        public static readonly Wake Instance = new();
    }

    public sealed class Event(EventRow row) : WriteOp
    {
        public EventRow Row { get; } = row;
    }

    public sealed class Template(TemplateRow row) : WriteOp
    {
        public TemplateRow Row { get; } = row;
    }

    public sealed class Purge(PurgeFilter filter) : WriteOp
    {
        public PurgeFilter Filter { get; } = filter;
        public List<long> Ids = [];
        public TaskCompletionSource<IReadOnlyList<long>> Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
        public override void Complete() => Result.TrySetResult(Ids);
        public override void Fail(Exception e) => Result.TrySetException(e);
    }

    /// <summary>Completes once everything queued before it is written; also wakes the writer (recovery).</summary>
    public class Barrier : WriteOp
    {
        public TaskCompletionSource Result { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);
        public override void Complete() => Result.TrySetResult();
        public override void Fail(Exception e) => Result.TrySetException(e);
    }

    /// <summary>Runs the sweep now (expiry, retention, change pruning), with the change limits given (tests).</summary>
    public sealed class Sweep(TimeSpan keepChangesFor, long maxChangesKept) : Barrier
    {
        public TimeSpan KeepChangesFor { get; } = keepChangesFor;
        public long MaxChangesKept { get; } = maxChangesKept;
    }
}
