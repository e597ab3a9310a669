using RewriteProxy.Store;

namespace RewriteProxy.Cache;

/// <summary>
/// The most recently served entries by id, in memory, least recently used out first. A semantic hit reads its
/// candidates here before the store: with a shared database that makes a repeated hit cost no network read. The
/// <see cref="IndexFollower"/> invalidates an id on every change to it, so an entry read here is as current as the index.
/// </summary>
public sealed class HotEntries
{
    /// <summary>
    /// Entries kept. An entry is a question, a rewrite of a few hundred words and its scores, about 4 KiB at most, so
    /// 10 000 take some 40 MiB at most. Hits go to the questions asked again, so a tenth of the default Store:MaxEntries
    /// holds the head of what is served (common practice: cache the head, leave the tail to the store).
    /// </summary>
    public const int DefaultCapacity = 10_000;

    readonly int _capacity;
    readonly Lock _lock = new();
    readonly Dictionary<long, LinkedListNode<StoredEntry>> _byId = [];
    readonly LinkedList<StoredEntry> _recency = new();
    long _invalidations;

    public HotEntries(int capacity = DefaultCapacity)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(capacity, 1);
        _capacity = capacity;
    }

    public int Count
    {
        get
        {
            lock (_lock) return _byId.Count;
        }
    }

    /// <summary>
    /// Taken before reading an entry from the store and given back to <see cref="Add"/>: an invalidation in between
    /// (the entry may have changed under the read) keeps the read entry out.
    /// </summary>
    public long Stamp => Interlocked.Read(ref _invalidations);

    /// <summary>The entry of <paramref name="id"/> if it is here and younger than <paramref name="minCreated"/>.</summary>
    public bool TryGet(long id, DateTimeOffset minCreated, out StoredEntry entry)
    {
        lock (_lock)
        {
            if (_byId.TryGetValue(id, out var node) && node.Value.Created >= minCreated)
            {
                _recency.Remove(node);
                _recency.AddFirst(node);
                entry = node.Value;
                return true;
            }
        }
        entry = null!;
        return false;
    }

    /// <summary>Keeps an entry read from the store, unless something was invalidated since <paramref name="stamp"/>.</summary>
    public void Add(StoredEntry entry, long stamp)
    {
        lock (_lock)
        {
            if (Interlocked.Read(ref _invalidations) != stamp) return;
            if (_byId.Remove(entry.Id, out var old)) _recency.Remove(old);
            _byId[entry.Id] = _recency.AddFirst(entry);
            if (_byId.Count > _capacity)
            {
                var last = _recency.Last!;
                _recency.RemoveLast();
                _byId.Remove(last.Value.Id);
            }
        }
    }

    /// <summary>Forgets an entry that was stored anew, replaced or deleted.</summary>
    public void Invalidate(long id)
    {
        lock (_lock)
        {
            Interlocked.Increment(ref _invalidations);
            if (_byId.Remove(id, out var node)) _recency.Remove(node);
        }
    }

    /// <summary>Forgets everything (the index was rebuilt).</summary>
    public void Clear()
    {
        lock (_lock)
        {
            Interlocked.Increment(ref _invalidations);
            _byId.Clear();
            _recency.Clear();
        }
    }
}
