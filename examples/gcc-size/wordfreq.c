/*
 * wordfreq: count the words of a text and print the most frequent ones.
 *
 * Part of the optim gcc-size example: this program is the code whose compiled
 * size the example minimises by choosing GCC optimisation flags. It is plain
 * C99, deterministic, and does real work: a tokenizer, an open-addressing hash
 * table with linear probing (FNV-1a hashing), a bottom-up merge sort and a
 * small report.
 *
 * Usage: wordfreq [-n TOP] [-m MINLEN] [-s] [FILE]
 *   -n TOP     print the TOP most frequent words (default 10)
 *   -m MINLEN  ignore words shorter than MINLEN letters (default 1)
 *   -s         also print length statistics
 *   FILE       read FILE instead of standard input
 *
 * A word is a run of ASCII letters, possibly joined by single apostrophes
 * ("don't"); letters are folded to lower case; a word longer than 64 letters
 * is counted by its first 64 characters. Ties in the ranking are broken
 * by the words' byte order, so the output depends on the input only.
 */

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define INITIAL_SLOTS 64u
#define MAX_WORD 64u

typedef struct {
    char *text;          /* NUL-terminated word, owned by the arena */
    uint32_t length;
    uint32_t hash;
    uint64_t count;
} Entry;

typedef struct {
    Entry *slots;        /* slots[i].text == NULL marks an empty slot */
    size_t capacity;     /* a power of two */
    size_t used;
} Table;

typedef struct ArenaBlock {
    struct ArenaBlock *next;
    size_t used;
    size_t size;
    char data[];
} ArenaBlock;

typedef struct {
    ArenaBlock *head;
} Arena;

typedef struct {
    uint64_t words;
    uint64_t letters;
    uint32_t longest;
    uint64_t by_length[MAX_WORD + 1];
} Stats;

static void *checked_malloc(size_t size)
{
    void *p = malloc(size ? size : 1);
    if (p == NULL) {
        fputs("wordfreq: out of memory\n", stderr);
        exit(2);
    }
    return p;
}

static void *checked_calloc(size_t count, size_t size)
{
    void *p = calloc(count ? count : 1, size ? size : 1);
    if (p == NULL) {
        fputs("wordfreq: out of memory\n", stderr);
        exit(2);
    }
    return p;
}

/* ---------------------------------------------------------------- arena */

static char *arena_copy(Arena *arena, const char *text, size_t length)
{
    ArenaBlock *block = arena->head;
    size_t need = length + 1;
    if (block == NULL || block->size - block->used < need) {
        size_t size = need > 4096 ? need : 4096;
        block = checked_malloc(sizeof(ArenaBlock) + size);
        block->next = arena->head;
        block->used = 0;
        block->size = size;
        arena->head = block;
    }
    char *out = block->data + block->used;
    memcpy(out, text, length);
    out[length] = '\0';
    block->used += need;
    return out;
}

static void arena_free(Arena *arena)
{
    ArenaBlock *block = arena->head;
    while (block != NULL) {
        ArenaBlock *next = block->next;
        free(block);
        block = next;
    }
    arena->head = NULL;
}

/* ---------------------------------------------------------------- hashing */

static uint32_t fnv1a(const char *text, size_t length)
{
    uint32_t hash = 2166136261u;
    for (size_t i = 0; i < length; i++) {
        hash ^= (unsigned char)text[i];
        hash *= 16777619u;
    }
    return hash;
}

static void table_init(Table *table)
{
    table->capacity = INITIAL_SLOTS;
    table->used = 0;
    table->slots = checked_calloc(table->capacity, sizeof(Entry));
}

static Entry *table_probe(Entry *slots, size_t capacity, const char *text, size_t length, uint32_t hash)
{
    size_t mask = capacity - 1;
    size_t i = hash & mask;
    for (;;) {
        Entry *slot = &slots[i];
        if (slot->text == NULL)
            return slot;
        if (slot->hash == hash && slot->length == length && memcmp(slot->text, text, length) == 0)
            return slot;
        i = (i + 1) & mask;
    }
}

static void table_grow(Table *table)
{
    size_t capacity = table->capacity * 2;
    Entry *slots = checked_calloc(capacity, sizeof(Entry));
    for (size_t i = 0; i < table->capacity; i++) {
        Entry *old = &table->slots[i];
        if (old->text != NULL)
            *table_probe(slots, capacity, old->text, old->length, old->hash) = *old;
    }
    free(table->slots);
    table->slots = slots;
    table->capacity = capacity;
}

static void table_add(Table *table, Arena *arena, const char *text, size_t length)
{
    uint32_t hash = fnv1a(text, length);
    Entry *slot = table_probe(table->slots, table->capacity, text, length, hash);
    if (slot->text != NULL) {
        slot->count++;
        return;
    }
    /* keep the load factor below 0.7 so probe runs stay short */
    if ((table->used + 1) * 10 > table->capacity * 7) {
        table_grow(table);
        slot = table_probe(table->slots, table->capacity, text, length, hash);
    }
    slot->text = arena_copy(arena, text, length);
    slot->length = (uint32_t)length;
    slot->hash = hash;
    slot->count = 1;
    table->used++;
}

/* ---------------------------------------------------------------- tokenizer */

static int is_letter(int c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
}

static int fold(int c)
{
    return (c >= 'A' && c <= 'Z') ? c - 'A' + 'a' : c;
}

/* Calls table_add for every word of buffer[0..size) of at least min_length letters. */
static void tokenize(const char *buffer, size_t size, size_t min_length, Table *table, Arena *arena,
                     Stats *stats)
{
    char word[MAX_WORD + 1];
    size_t i = 0;
    while (i < size) {
        while (i < size && !is_letter((unsigned char)buffer[i]))
            i++;
        size_t length = 0, letters = 0;
        while (i < size) {
            int c = (unsigned char)buffer[i];
            if (is_letter(c)) {
                if (length < MAX_WORD)
                    word[length++] = (char)fold(c);
                letters++;
                i++;
            } else if (c == '\'' && length > 0 && i + 1 < size && is_letter((unsigned char)buffer[i + 1])) {
                if (length < MAX_WORD)
                    word[length++] = '\'';
                i++;
            } else {
                break;
            }
        }
        if (length == 0 || letters < min_length)
            continue;
        table_add(table, arena, word, length);
        stats->words++;
        stats->letters += letters;
        if (letters > stats->longest)
            stats->longest = (uint32_t)letters;
        stats->by_length[letters < MAX_WORD ? letters : MAX_WORD]++;
    }
}

/* ---------------------------------------------------------------- sorting */

/* Ranking order: higher count first, then byte order of the words. */
static int entry_before(const Entry *a, const Entry *b)
{
    if (a->count != b->count)
        return a->count > b->count;
    return strcmp(a->text, b->text) < 0;
}

/* Bottom-up merge sort (stable): runs of width 1, 2, 4, ... are merged into scratch and back. */
static void merge_sort(Entry *items, size_t count)
{
    if (count < 2)
        return;
    Entry *scratch = checked_malloc(count * sizeof(Entry));
    Entry *from = items, *to = scratch;
    for (size_t width = 1; width < count; width *= 2) {
        for (size_t left = 0; left < count; left += 2 * width) {
            size_t middle = left + width < count ? left + width : count;
            size_t right = left + 2 * width < count ? left + 2 * width : count;
            size_t a = left, b = middle, k = left;
            while (a < middle && b < right)
                to[k++] = entry_before(&from[b], &from[a]) ? from[b++] : from[a++];
            while (a < middle)
                to[k++] = from[a++];
            while (b < right)
                to[k++] = from[b++];
        }
        Entry *swap = from;
        from = to;
        to = swap;
    }
    if (from != items)
        memcpy(items, from, count * sizeof(Entry));
    free(scratch);
}

/* ---------------------------------------------------------------- input */

static char *read_all(FILE *stream, size_t *size_out)
{
    size_t capacity = 1 << 16, size = 0;
    char *buffer = checked_malloc(capacity);
    for (;;) {
        if (size == capacity) {
            capacity *= 2;
            char *bigger = realloc(buffer, capacity);
            if (bigger == NULL) {
                free(buffer);
                fputs("wordfreq: out of memory\n", stderr);
                exit(2);
            }
            buffer = bigger;
        }
        size_t got = fread(buffer + size, 1, capacity - size, stream);
        size += got;
        if (got == 0)
            break;
    }
    *size_out = size;
    return buffer;
}

static int parse_count(const char *text, long *out)
{
    char *end = NULL;
    long value = strtol(text, &end, 10);
    if (end == text || *end != '\0' || value < 0)
        return 0;
    *out = value;
    return 1;
}

static void usage(void)
{
    fputs("usage: wordfreq [-n TOP] [-m MINLEN] [-s] [FILE]\n", stderr);
}

/* ---------------------------------------------------------------- report */

static void print_report(const Entry *ranked, size_t distinct, size_t top, const Stats *stats, int with_stats)
{
    printf("words %llu\n", (unsigned long long)stats->words);
    printf("distinct %zu\n", distinct);
    size_t shown = top < distinct ? top : distinct;
    for (size_t i = 0; i < shown; i++)
        printf("%7llu %s\n", (unsigned long long)ranked[i].count, ranked[i].text);
    if (!with_stats)
        return;
    printf("longest %u\n", stats->longest);
    if (stats->words > 0) {
        unsigned long long tenths = (unsigned long long)((stats->letters * 10 + stats->words / 2) / stats->words);
        printf("mean-length %llu.%llu\n", tenths / 10, tenths % 10);
    }
    for (uint32_t length = 1; length <= MAX_WORD; length++)
        if (stats->by_length[length] > 0)
            printf("length %u %llu\n", length, (unsigned long long)stats->by_length[length]);
}

int main(int argc, char **argv)
{
    long top = 10, min_length = 1;
    int with_stats = 0;
    const char *path = NULL;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "-n") == 0 && i + 1 < argc) {
            if (!parse_count(argv[++i], &top)) {
                usage();
                return 2;
            }
        } else if (strcmp(argv[i], "-m") == 0 && i + 1 < argc) {
            if (!parse_count(argv[++i], &min_length)) {
                usage();
                return 2;
            }
        } else if (strcmp(argv[i], "-s") == 0) {
            with_stats = 1;
        } else if (argv[i][0] == '-' && argv[i][1] != '\0') {
            usage();
            return 2;
        } else if (path == NULL) {
            path = argv[i];
        } else {
            usage();
            return 2;
        }
    }

    FILE *stream = stdin;
    if (path != NULL) {
        stream = fopen(path, "rb");
        if (stream == NULL) {
            fprintf(stderr, "wordfreq: cannot open %s\n", path);
            return 1;
        }
    }
    size_t size = 0;
    char *buffer = read_all(stream, &size);
    if (stream != stdin)
        fclose(stream);

    Table table;
    Arena arena = {NULL};
    Stats stats;
    memset(&stats, 0, sizeof stats);
    table_init(&table);
    tokenize(buffer, size, (size_t)min_length, &table, &arena, &stats);
    free(buffer);

    Entry *ranked = checked_malloc(table.used * sizeof(Entry));
    size_t distinct = 0;
    for (size_t i = 0; i < table.capacity; i++)
        if (table.slots[i].text != NULL)
            ranked[distinct++] = table.slots[i];
    merge_sort(ranked, distinct);
    print_report(ranked, distinct, (size_t)top, &stats, with_stats);

    free(ranked);
    free(table.slots);
    arena_free(&arena);
    return 0;
}
