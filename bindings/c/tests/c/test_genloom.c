/* The C test of genloom's C ABI: every call, compared byte for byte with what the Rust API wrote
 * (by the c-test-expected example) into EXPECTED_DIR, plus misuse and a 4-thread test.
 *
 *   test_genloom EXPECTED_DIR MODELS_DIR [--under-valgrind]
 *
 * Run by scripts/test-c.sh, plain, under valgrind and with AddressSanitizer. Prints one line per
 * test and a closing "N passed, M failed" line; exits 1 if any test failed. */
#include "genloom.h"

#include <math.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static const char *expected_dir;
static const char *models_dir;
static int test_failed;
/* With --under-valgrind, inference outputs (floats, RGBA) are compared within a tolerance instead
 * of byte for byte: valgrind's virtual CPU lacks AVX-512, so tract picks other matrix kernels whose
 * sums round differently. Latents, interpolation and PNG encoding stay exact in every mode. And as
 * inference is some 300 times slower there, the threads test runs 5 batches per thread, not 50. */
static int tolerant;
static int batches = 50;
#define FLOAT_TOLERANCE 1e-4f

static void fail(int line, const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    fprintf(stderr, "    line %d: ", line);
    vfprintf(stderr, fmt, ap);
    fprintf(stderr, "\n");
    va_end(ap);
    test_failed = 1;
}

#define CHECK(cond)                                                                               \
    do {                                                                                          \
        if (!(cond)) fail(__LINE__, "check failed: %s", #cond);                                   \
    } while (0)

#define CHECK_STATUS(call, want)                                                                  \
    do {                                                                                          \
        genloom_status s_ = (call);                                                               \
        if (s_ != (want))                                                                         \
            fail(__LINE__, "%s gave %s, expected %s (message: %s)", #call,                        \
                 genloom_status_name(s_), genloom_status_name(want), genloom_last_error_message()); \
    } while (0)

#define CHECK_OK(call) CHECK_STATUS(call, GENLOOM_STATUS_OK)

/* The last error message contains `part`. */
#define CHECK_MESSAGE(part)                                                                       \
    do {                                                                                          \
        if (strstr(genloom_last_error_message(), (part)) == NULL)                                 \
            fail(__LINE__, "message `%s` lacks `%s`", genloom_last_error_message(), (part));      \
    } while (0)

static char *join(const char *dir, const char *name) {
    size_t n = strlen(dir) + strlen(name) + 2;
    char *p = malloc(n);
    snprintf(p, n, "%s/%s", dir, name);
    return p;
}

/* Reads a whole file (malloc'd; NULL on failure). */
static unsigned char *read_file(const char *dir, const char *name, size_t *len) {
    char *path = join(dir, name);
    FILE *f = fopen(path, "rb");
    unsigned char *data = NULL;
    *len = 0;
    if (f != NULL) {
        fseek(f, 0, SEEK_END);
        long size = ftell(f);
        fseek(f, 0, SEEK_SET);
        data = malloc(size > 0 ? (size_t)size : 1);
        if (data != NULL && fread(data, 1, (size_t)size, f) == (size_t)size) {
            *len = (size_t)size;
        } else {
            free(data);
            data = NULL;
        }
        fclose(f);
    }
    if (data == NULL) fprintf(stderr, "    cannot read %s\n", path);
    free(path);
    return data;
}

/* `got` (len bytes) equals the expected file byte for byte. */
#define CHECK_SAME(got, len, file) check_same(__LINE__, (const void *)(got), (len), (file))
static void check_same(int line, const void *got, size_t len, const char *file) {
    size_t want_len;
    unsigned char *want = read_file(expected_dir, file, &want_len);
    if (want == NULL) {
        fail(line, "no expected file %s", file);
        return;
    }
    if (want_len != len) {
        fail(line, "%s: %zu bytes, expected %zu", file, len, want_len);
    } else if (memcmp(want, got, len) != 0) {
        size_t i = 0;
        while (((const unsigned char *)got)[i] == want[i]) i++;
        fail(line, "%s: differs from the Rust API's bytes, first at byte %zu", file, i);
    }
    free(want);
}

/* Inference floats: exact, or within `tolerance` with --under-valgrind (valgrind's CPU lacks
 * some instruction sets, so tract picks other kernels there). */
#define CHECK_IMAGES(got, count, file) check_images(__LINE__, (got), (count), (file), FLOAT_TOLERANCE)
/* f16 compute under valgrind: other kernels round binary16 sums differently; the bound is the
 * runtime's own f16 compute bound, 4e-3 of the range width (about one 8-bit level). */
#define CHECK_IMAGES_F16(got, count, file) \
    check_images(__LINE__, (got), (count), (file), 4e-3f * (tiles_sig.hi - tiles_sig.lo))
static void check_images(int line, const float *got, size_t count, const char *file, float tolerance) {
    if (!tolerant) {
        check_same(line, got, count * sizeof(float), file);
        return;
    }
    size_t len;
    float *want = (float *)read_file(expected_dir, file, &len);
    if (want == NULL || len != count * sizeof(float)) {
        fail(line, "%s: missing or of another size", file);
    } else {
        float worst = 0;
        for (size_t i = 0; i < count; i++) {
            float d = fabsf(got[i] - want[i]);
            if (!(d <= worst)) worst = d; /* NaN counts as worst */
        }
        if (!(worst <= tolerance)) fail(line, "%s: differs by up to %g", file, worst);
    }
    free(want);
}

/* RGBA8 pixels: exact, or within 1 level with --under-valgrind. */
static void check_rgba(int line, const unsigned char *got, size_t len, const char *file) {
    if (!tolerant) {
        check_same(line, got, len, file);
        return;
    }
    size_t want_len;
    unsigned char *want = read_file(expected_dir, file, &want_len);
    if (want == NULL || want_len != len) {
        fail(line, "%s: missing or of another size", file);
    } else {
        for (size_t i = 0; i < len; i++) {
            if (abs((int)got[i] - (int)want[i]) > 1) {
                fail(line, "%s: byte %zu is %d, expected %d", file, i, got[i], want[i]);
                break;
            }
        }
    }
    free(want);
}

static genloom_generator *open_model(const char *name, const genloom_options *options) {
    char *path = join(models_dir, name);
    genloom_generator *g = NULL;
    genloom_status s = genloom_generator_open_path(path, options, &g);
    if (s != GENLOOM_STATUS_OK) {
        fprintf(stderr, "    cannot open %s: %s: %s\n", path, genloom_status_name(s),
                genloom_last_error_message());
        test_failed = 1;
    }
    free(path);
    return g;
}

/* Signature of a model, as the expected writer prints it. */
typedef struct {
    size_t dim, classes, width, height, channels;
    genloom_layout layout;
    float lo, hi;
} sig;

static int read_sig(const char *file, sig *s) {
    char *path = join(expected_dir, file);
    FILE *f = fopen(path, "r");
    free(path);
    if (f == NULL) return 0;
    unsigned layout;
    int n = fscanf(f, "%zu %zu %zu %zu %zu %u %f %f", &s->dim, &s->classes, &s->width, &s->height,
                   &s->channels, &layout, &s->lo, &s->hi);
    s->layout = layout;
    fclose(f);
    return n == 8;
}

static sig tiles_sig;

/* ---------------------------------------------------------------------------------------- */

static void test_version(void) {
    char want[64];
    snprintf(want, sizeof want, "%d.%d.%d", GENLOOM_VERSION_MAJOR, GENLOOM_VERSION_MINOR,
             GENLOOM_VERSION_PATCH);
    CHECK(strcmp(genloom_version(), want) == 0);
    CHECK(strcmp(GENLOOM_VERSION_STRING, want) == 0);
}

static void test_status_names(void) {
    CHECK(GENLOOM_STATUS_OK == 0);
    CHECK(GENLOOM_STATUS_BUFFER_TOO_SMALL == 3);
    CHECK(GENLOOM_STATUS_PANIC == 11);
    CHECK(strcmp(genloom_status_name(GENLOOM_STATUS_OK), "GENLOOM_STATUS_OK") == 0);
    /* The renamed status keeps its number, and its old name stays an alias for one release. */
    CHECK(GENLOOM_STATUS_UNRECOGNIZED_MODEL == 5 && GENLOOM_STATUS_SIGNATURE == 5);
    CHECK(strcmp(genloom_status_name(5), "GENLOOM_STATUS_UNRECOGNIZED_MODEL") == 0);
    CHECK(strcmp(genloom_status_name(GENLOOM_STATUS_CANCELLED), "GENLOOM_STATUS_CANCELLED") == 0);
    CHECK(strcmp(genloom_status_name(GENLOOM_STATUS_INTERNAL), "GENLOOM_STATUS_INTERNAL") == 0);
    CHECK(strcmp(genloom_status_name(-1), "GENLOOM_STATUS_UNKNOWN") == 0);
    CHECK(strcmp(genloom_status_name(4711), "GENLOOM_STATUS_UNKNOWN") == 0);
}

static void test_signature(void) {
    genloom_generator *g = open_model("tiles.onnx", NULL);
    if (g == NULL) return;
    size_t dim = 0, classes = 9, w = 0, h = 0, c = 0, n = 0;
    genloom_layout layout = 9;
    float lo = 0, hi = 0;
    CHECK_OK(genloom_generator_get_latent_dim(g, &dim));
    CHECK_OK(genloom_generator_get_label_classes(g, &classes));
    CHECK_OK(genloom_generator_get_width(g, &w));
    CHECK_OK(genloom_generator_get_height(g, &h));
    CHECK_OK(genloom_generator_get_channels(g, &c));
    CHECK_OK(genloom_generator_get_layout(g, &layout));
    CHECK_OK(genloom_generator_get_range(g, &lo, &hi));
    CHECK(dim == tiles_sig.dim && classes == 0 && w == tiles_sig.width && h == tiles_sig.height);
    CHECK(c == tiles_sig.channels && layout == tiles_sig.layout);
    CHECK(lo == tiles_sig.lo && hi == tiles_sig.hi);
    CHECK_OK(genloom_generator_get_output_len(g, 16, GENLOOM_OUTPUT_LATENTS, &n));
    CHECK(n == 16 * dim);
    CHECK_OK(genloom_generator_get_output_len(g, 16, GENLOOM_OUTPUT_FLOAT, &n));
    CHECK(n == 16 * c * h * w);
    CHECK_OK(genloom_generator_get_output_len(g, 16, GENLOOM_OUTPUT_RGBA8, &n));
    CHECK(n == 16 * h * w * 4);
    genloom_generator_free(g);
}

static void check_sample(genloom_generator *g, const char *file, uint64_t seed, uint64_t first,
                         size_t count, genloom_prior prior, float truncation, float psi,
                         bool numpy) {
    size_t needed = 0;
    /* Size query first, then the real call into a buffer of exactly that size. */
    CHECK_STATUS(genloom_generator_sample_latents(g, seed, first, count, prior, truncation, psi,
                                                  numpy, NULL, 0, &needed),
                 GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(needed == count * tiles_sig.dim);
    float *z = malloc(needed * sizeof(float));
    size_t written = 0;
    CHECK_OK(genloom_generator_sample_latents(g, seed, first, count, prior, truncation, psi, numpy,
                                              z, needed, &written));
    CHECK(written == needed);
    CHECK_SAME(z, needed * sizeof(float), file);
    /* The sample-options handle draws the same bits, each value set by name. */
    genloom_sample_options *so = NULL;
    CHECK_OK(genloom_sample_options_new(&so));
    CHECK_OK(genloom_sample_options_set_seed(so, seed));
    CHECK_OK(genloom_sample_options_set_first_index(so, first));
    CHECK_OK(genloom_sample_options_set_prior(so, prior));
    if (truncation > 0) CHECK_OK(genloom_sample_options_set_truncation(so, truncation));
    if (psi >= 0) CHECK_OK(genloom_sample_options_set_psi(so, psi));
    CHECK_OK(genloom_sample_options_set_numpy_compatible(so, numpy));
    memset(z, 0, needed * sizeof(float));
    CHECK_OK(genloom_generator_sample(g, so, count, z, needed, &written));
    CHECK(written == needed);
    CHECK_SAME(z, needed * sizeof(float), file);
    genloom_sample_options_free(so);
    free(z);
}

static void test_sample_latents(void) {
    genloom_generator *g = open_model("tiles.onnx", NULL);
    if (g == NULL) return;
    check_sample(g, "latents-gaussian.f32", 7, 0, 16, GENLOOM_PRIOR_GAUSSIAN, 0, -1, false);
    check_sample(g, "latents-first5.f32", 7, 5, 3, GENLOOM_PRIOR_GAUSSIAN, 0, -1, false);
    check_sample(g, "latents-uniform.f32", 7, 0, 4, GENLOOM_PRIOR_UNIFORM, 0, -1, false);
    check_sample(g, "latents-truncated.f32", 7, 0, 4, GENLOOM_PRIOR_GAUSSIAN, 1.0f, -1, false);
    check_sample(g, "latents-psi.f32", 7, 0, 4, GENLOOM_PRIOR_GAUSSIAN, 0, 0.7f, false);
    check_sample(g, "latents-numpy.f32", 7, 0, 4, GENLOOM_PRIOR_GAUSSIAN, 0, -1, true);
    genloom_generator_free(g);
}

static float *expected_latents(size_t *count) {
    size_t len;
    float *z = (float *)read_file(expected_dir, "latents-gaussian.f32", &len);
    *count = z == NULL ? 0 : len / sizeof(float) / tiles_sig.dim;
    return z;
}

static void test_interpolate(void) {
    size_t count, needed = 0, dim = tiles_sig.dim;
    float *z = expected_latents(&count);
    if (z == NULL) return;
    float *frames = malloc(16 * dim * sizeof(float));
    CHECK_STATUS(genloom_latent_interpolate(z, dim, z + dim, dim, GENLOOM_INTERPOLATION_LERP, 5,
                                            NULL, 0, &needed),
                 GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(needed == 5 * dim);
    CHECK_OK(genloom_latent_interpolate(z, dim, z + dim, dim, GENLOOM_INTERPOLATION_LERP, 5, frames,
                                        5 * dim, &needed));
    CHECK_SAME(frames, 5 * dim * sizeof(float), "lerp5.f32");
    CHECK_OK(genloom_latent_interpolate(z, dim, z + dim, dim, GENLOOM_INTERPOLATION_SLERP, 5,
                                        frames, 16 * dim, &needed));
    CHECK(needed == 5 * dim);
    CHECK_SAME(frames, 5 * dim * sizeof(float), "slerp5.f32");
    CHECK_OK(genloom_latent_interpolate_path(z, 3 * dim, dim, GENLOOM_INTERPOLATION_SLERP, 4, true,
                                             frames, 16 * dim, &needed));
    CHECK(needed == 12 * dim);
    CHECK_SAME(frames, needed * sizeof(float), "path-slerp-looped.f32");
    CHECK_OK(genloom_latent_interpolate_path(z, 3 * dim, dim, GENLOOM_INTERPOLATION_LERP, 4, false,
                                             frames, 16 * dim, &needed));
    CHECK(needed == 9 * dim);
    CHECK_SAME(frames, needed * sizeof(float), "path-lerp-open.f32");
    free(frames);
    free(z);
}

static void test_generate(void) {
    genloom_generator *g = open_model("tiles.onnx", NULL);
    size_t count, needed = 0;
    float *z = expected_latents(&count);
    unsigned char *rgba = NULL;
    if (g == NULL || z == NULL) goto done;
    size_t per = tiles_sig.channels * tiles_sig.height * tiles_sig.width;
    CHECK_STATUS(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL, NULL,
                                            0, &needed),
                 GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(needed == count * per);
    float *images = malloc(needed * sizeof(float));
    CHECK_OK(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL, images,
                                        needed, &needed));
    CHECK_IMAGES(images, count * per, "images.f32");
    free(images);

    size_t bytes = count * tiles_sig.height * tiles_sig.width * 4;
    rgba = malloc(bytes);
    CHECK_STATUS(genloom_generator_generate_rgba8(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL,
                                                  rgba, bytes - 1, &needed),
                 GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(needed == bytes);
    CHECK_OK(genloom_generator_generate_rgba8(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL,
                                              rgba, bytes, &needed));
    check_rgba(__LINE__, rgba, bytes, "images.rgba");

    /* The PNG of each of the Rust API's tiles equals the Rust API's PNG file. */
    free(rgba);
    rgba = read_file(expected_dir, "images.rgba", &bytes);
    if (rgba == NULL || bytes != count * tiles_sig.height * tiles_sig.width * 4) {
        fail(__LINE__, "images.rgba is missing or of another size");
        goto done;
    }
    size_t tile = tiles_sig.height * tiles_sig.width * 4;
    for (size_t i = 0; i < count; i++) {
        size_t len = 0;
        CHECK_STATUS(genloom_pixels_encode_png(rgba + i * tile, tile, tiles_sig.width,
                                               tiles_sig.height, NULL, 0, &len),
                     GENLOOM_STATUS_BUFFER_TOO_SMALL);
        unsigned char *png = malloc(len);
        size_t written = 0;
        CHECK_OK(genloom_pixels_encode_png(rgba + i * tile, tile, tiles_sig.width, tiles_sig.height,
                                           png, len, &written));
        CHECK(written == len);
        char name[32];
        snprintf(name, sizeof name, "tile-%02zu.png", i);
        CHECK_SAME(png, len, name);
        free(png);
    }
done:
    free(rgba);
    free(z);
    genloom_generator_free(g);
}

static void test_open_bytes_and_options(void) {
    size_t len, count, needed;
    char *path = join(models_dir, "tiles.onnx");
    unsigned char *model = read_file(models_dir, "tiles.onnx", &len);
    float *z = expected_latents(&count);
    genloom_options *o = NULL;
    genloom_generator *g = NULL;
    free(path);
    if (model == NULL || z == NULL) goto done;
    CHECK_OK(genloom_options_new(&o));
    CHECK_OK(genloom_options_set_threads(o, 2));
    CHECK_OK(genloom_options_set_micro_batch(o, 3));
    CHECK_OK(genloom_options_set_warm_up(o, false));
    CHECK_OK(genloom_options_set_f16_compute(o, false));
    CHECK_STATUS(genloom_options_set_threads(o, 0), GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("threads is 0");
    CHECK_OK(genloom_generator_open_bytes(model, len, o, &g));
    genloom_options_free(o); /* the generator keeps its own copy */
    o = NULL;
    free(model); /* and does not keep the bytes */
    model = NULL;
    if (g == NULL) goto done;
    size_t n = count * tiles_sig.channels * tiles_sig.height * tiles_sig.width;
    float *images = malloc(n * sizeof(float));
    CHECK_OK(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL, images, n,
                                        &needed));
    CHECK_IMAGES(images, n, "images-mb3-t2.f32");
    free(images);
done:
    free(model);
    free(z);
    genloom_options_free(o);
    genloom_generator_free(g);
}

static void test_f16_compute(void) {
    size_t count, needed;
    float *z = expected_latents(&count);
    genloom_options *o = NULL;
    genloom_generator *g = NULL;
    float *images = NULL;
    if (z == NULL) goto done;
    CHECK_OK(genloom_options_new(&o));
    CHECK_OK(genloom_options_set_f16_compute(o, true));
    CHECK_STATUS(genloom_options_set_f16_compute(NULL, true), GENLOOM_STATUS_NULL_ARGUMENT);
    g = open_model("tiles.onnx", o);
    if (g == NULL) goto done;
    size_t n = count * tiles_sig.channels * tiles_sig.height * tiles_sig.width;
    images = malloc(n * sizeof(float));
    CHECK_OK(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, NULL, NULL, images, n,
                                        &needed));
    CHECK_IMAGES_F16(images, n, "images-f16-compute.f32");
done:
    free(images);
    free(z);
    genloom_options_free(o);
    genloom_generator_free(g);
}

static void test_conditional(void) {
    sig ks;
    if (!read_sig("kind-signature.txt", &ks)) {
        fail(__LINE__, "cannot read kind-signature.txt");
        return;
    }
    genloom_generator *g = open_model("tiles-kind.onnx", NULL);
    if (g == NULL) return;
    size_t classes = 0, dim = 0, needed = 0;
    CHECK_OK(genloom_generator_get_label_classes(g, &classes));
    CHECK_OK(genloom_generator_get_latent_dim(g, &dim));
    CHECK(classes == ks.classes && classes > 0 && dim == ks.dim);
    float *z = malloc(8 * dim * sizeof(float));
    CHECK_OK(genloom_generator_sample_latents(g, 7, 0, 8, GENLOOM_PRIOR_GAUSSIAN, 0, -1, false, z,
                                              8 * dim, &needed));
    int64_t labels[8];
    for (int i = 0; i < 8; i++) labels[i] = i % (int64_t)(classes ? classes : 1);
    size_t n = 8 * ks.channels * ks.height * ks.width;
    float *images = malloc(n * sizeof(float));
    CHECK_OK(genloom_generator_generate(g, z, 8 * dim, labels, 8, NULL, NULL, images, n, &needed));
    CHECK_IMAGES(images, n, "kind-images.f32");
    CHECK_STATUS(genloom_generator_generate(g, z, 8 * dim, NULL, 0, NULL, NULL, images, n, &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("conditional");
    labels[5] = (int64_t)classes;
    CHECK_STATUS(genloom_generator_generate(g, z, 8 * dim, labels, 8, NULL, NULL, images, n,
                                            &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("label 5 is");
    CHECK_STATUS(genloom_generator_generate(g, z, 8 * dim, labels, 7, NULL, NULL, images, n,
                                            &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("7 labels for 8 latents");
    free(images);
    free(z);
    genloom_generator_free(g);
}

typedef struct {
    int calls;
    int cancel_at;
    size_t last_done, last_total;
} progress_log;

static int on_progress(void *user_data, size_t done, size_t total) {
    progress_log *log = user_data;
    log->calls++;
    log->last_done = done;
    log->last_total = total;
    return log->calls != log->cancel_at; /* nonzero: go on; zero: cancel */
}

static void test_progress(void) {
    genloom_options *o = NULL;
    CHECK_OK(genloom_options_new(&o));
    CHECK_OK(genloom_options_set_micro_batch(o, 4));
    genloom_generator *g = open_model("tiles.onnx", o);
    genloom_options_free(o);
    size_t count, needed = 77;
    float *z = expected_latents(&count);
    if (g == NULL || z == NULL) goto done;
    size_t n = count * tiles_sig.channels * tiles_sig.height * tiles_sig.width;
    float *images = malloc(n * sizeof(float));
    progress_log log = {0, -1, 0, 0};
    CHECK_OK(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, on_progress, &log,
                                        images, n, &needed));
    CHECK(log.calls == 4 && log.last_done == 16 && log.last_total == 16);
    CHECK_IMAGES(images, n, "images.f32");

    for (size_t i = 0; i < n; i++) images[i] = 42.0f;
    progress_log stop = {0, 2, 0, 0};
    needed = 77;
    CHECK_STATUS(genloom_generator_generate(g, z, count * tiles_sig.dim, NULL, 0, on_progress,
                                            &stop, images, n, &needed),
                 GENLOOM_STATUS_CANCELLED);
    CHECK_MESSAGE("cancelled after 8 of 16");
    CHECK(stop.calls == 2 && needed == 77);
    int untouched = 1;
    for (size_t i = 0; i < n; i++) untouched &= images[i] == 42.0f;
    CHECK(untouched);
    free(images);
done:
    free(z);
    genloom_generator_free(g);
}

static void test_misuse(void) {
    genloom_generator *g = open_model("tiles.onnx", NULL), *none = NULL;
    if (g == NULL) return;
    size_t n = 0, needed = 0;
    float z[128] = {0}, small[10];
    /* NULL arguments. */
    CHECK_STATUS(genloom_generator_get_width(NULL, &n), GENLOOM_STATUS_NULL_ARGUMENT);
    CHECK_MESSAGE("`generator` is NULL");
    CHECK_STATUS(genloom_generator_get_width(g, NULL), GENLOOM_STATUS_NULL_ARGUMENT);
    CHECK_STATUS(genloom_generator_open_path(NULL, NULL, &none), GENLOOM_STATUS_NULL_ARGUMENT);
    CHECK_STATUS(genloom_options_new(NULL), GENLOOM_STATUS_NULL_ARGUMENT);
    CHECK_STATUS(genloom_generator_generate(g, NULL, 64, NULL, 0, NULL, NULL, small, 10, &needed),
                 GENLOOM_STATUS_NULL_ARGUMENT);
    CHECK_MESSAGE("`latents` is NULL but its length is 64");
    /* Short buffers leave the buffer alone and say what is needed. */
    for (int i = 0; i < 10; i++) small[i] = -3.0f;
    CHECK_STATUS(genloom_generator_sample_latents(g, 1, 0, 2, GENLOOM_PRIOR_GAUSSIAN, 0, -1, false,
                                                  small, 10, &needed),
                 GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(needed == 2 * tiles_sig.dim && small[0] == -3.0f && small[9] == -3.0f);
    CHECK_MESSAGE("holds 10 floats");
    /* Unknown enum values and bad numbers. */
    CHECK_STATUS(genloom_generator_sample_latents(g, 1, 0, 2, 5, 0, -1, false, NULL, 0, &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("`prior` is 5");
    CHECK_STATUS(genloom_generator_get_output_len(g, 1, 99, &n), GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_STATUS(genloom_latent_interpolate(z, 64, z + 64, 64, 2, 3, small, 10, &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_STATUS(genloom_generator_generate(g, z, 100, NULL, 0, NULL, NULL, small, 10, &needed),
                 GENLOOM_STATUS_INVALID_ARGUMENT);
    CHECK_MESSAGE("`latents_len` is 100");
    /* Loads that fail. */
    const unsigned char garbage[] = "certainly not a protobuf";
    CHECK_STATUS(genloom_generator_open_bytes(garbage, sizeof garbage, NULL, &none),
                 GENLOOM_STATUS_LOAD_FAILED);
    CHECK_MESSAGE("not an ONNX model");
    CHECK_STATUS(genloom_generator_open_path("no/such/file.onnx", NULL, &none), GENLOOM_STATUS_IO);
    CHECK_MESSAGE("no/such/file.onnx");
    CHECK(none == NULL);
    /* The message copy. */
    size_t len = 0;
    CHECK_STATUS(genloom_last_error_copy(NULL, 0, &len), GENLOOM_STATUS_BUFFER_TOO_SMALL);
    CHECK(len == strlen(genloom_last_error_message()) + 1);
    char *copy = malloc(len);
    CHECK_OK(genloom_last_error_copy(copy, len, &len));
    CHECK(strcmp(copy, genloom_last_error_message()) == 0);
    free(copy);
    /* A success clears the message. */
    CHECK_OK(genloom_generator_get_width(g, &n));
    CHECK(strcmp(genloom_last_error_message(), "") == 0);
    /* Freeing NULL is fine, twice. */
    genloom_generator_free(NULL);
    genloom_generator_free(NULL);
    genloom_options_free(NULL);
    genloom_generator_free(g);
}

/* 4 threads share one handle, each generating 50 batches; each must equal the serial result. */
#define THREADS 4
#define BATCHES 50 /* at most; `batches` are run */
#define BATCH 2

typedef struct {
    const genloom_generator *g;
    const float *z;      /* BATCHES * BATCH latents */
    const float *serial; /* the serial images of each batch */
    size_t per;          /* floats per image */
    int offset;          /* each thread starts at a different batch */
    int mismatches;
    int failures;
} worker;

static void *work(void *arg) {
    worker *w = arg;
    float *out = malloc(BATCH * w->per * sizeof(float));
    for (int k = 0; k < batches; k++) {
        int b = (k + w->offset) % batches;
        size_t needed;
        genloom_status s = genloom_generator_generate(w->g, w->z + (size_t)b * BATCH * tiles_sig.dim,
                                                      BATCH * tiles_sig.dim, NULL, 0, NULL, NULL,
                                                      out, BATCH * w->per, &needed);
        if (s != GENLOOM_STATUS_OK) {
            w->failures++;
        } else if (memcmp(out, w->serial + (size_t)b * BATCH * w->per,
                          BATCH * w->per * sizeof(float)) != 0) {
            w->mismatches++;
        }
    }
    free(out);
    return NULL;
}

static void test_threads(void) {
    genloom_generator *g = open_model("tiles.onnx", NULL);
    if (g == NULL) return;
    size_t dim = tiles_sig.dim, per = tiles_sig.channels * tiles_sig.height * tiles_sig.width;
    size_t needed;
    float *z = malloc(BATCHES * BATCH * dim * sizeof(float));
    float *serial = malloc(BATCHES * BATCH * per * sizeof(float));
    CHECK_OK(genloom_generator_sample_latents(g, 2024, 0, BATCHES * BATCH, GENLOOM_PRIOR_GAUSSIAN,
                                              0, -1, false, z, BATCHES * BATCH * dim, &needed));
    for (int b = 0; b < batches; b++) {
        CHECK_OK(genloom_generator_generate(g, z + (size_t)b * BATCH * dim, BATCH * dim, NULL, 0,
                                            NULL, NULL, serial + (size_t)b * BATCH * per,
                                            BATCH * per, &needed));
    }
    pthread_t threads[THREADS];
    worker workers[THREADS];
    for (int t = 0; t < THREADS; t++) {
        workers[t] = (worker){g, z, serial, per, t * 13 % batches, 0, 0};
        CHECK(pthread_create(&threads[t], NULL, work, &workers[t]) == 0);
    }
    int mismatches = 0, failures = 0;
    for (int t = 0; t < THREADS; t++) {
        pthread_join(threads[t], NULL);
        mismatches += workers[t].mismatches;
        failures += workers[t].failures;
    }
    if (mismatches || failures)
        fail(__LINE__, "%d failed calls and %d results unlike the serial ones", failures,
             mismatches);
    free(z);
    free(serial);
    genloom_generator_free(g);
}

typedef struct {
    const char *name;
    void (*run)(void);
} test;

int main(int argc, char **argv) {
    tolerant = argc == 4 && strcmp(argv[3], "--under-valgrind") == 0;
    if (argc != 3 && !tolerant) {
        fprintf(stderr, "usage: %s EXPECTED_DIR MODELS_DIR [--under-valgrind]\n", argv[0]);
        return 2;
    }
    if (tolerant) {
        batches = 5;
        printf("under valgrind: inference compared within %g (floats) and 1 level (RGBA); "
               "threads test %d x %d batches\n", FLOAT_TOLERANCE, THREADS, batches);
    }
    expected_dir = argv[1];
    models_dir = argv[2];
    if (!read_sig("signature.txt", &tiles_sig)) {
        fprintf(stderr, "cannot read %s/signature.txt\n", expected_dir);
        return 2;
    }
    const test tests[] = {
        {"version", test_version},
        {"status_names", test_status_names},
        {"signature", test_signature},
        {"sample_latents", test_sample_latents},
        {"interpolate", test_interpolate},
        {"generate_floats_rgba8_png", test_generate},
        {"open_bytes_and_options", test_open_bytes_and_options},
        {"f16_compute", test_f16_compute},
        {"conditional", test_conditional},
        {"progress_and_cancel", test_progress},
        {"misuse", test_misuse},
        {"threads_share_one_handle", test_threads},
    };
    int passed = 0, failed = 0;
    for (size_t i = 0; i < sizeof tests / sizeof tests[0]; i++) {
        test_failed = 0;
        struct timespec t0, t1;
        clock_gettime(CLOCK_MONOTONIC, &t0);
        tests[i].run();
        clock_gettime(CLOCK_MONOTONIC, &t1);
        double ms = (t1.tv_sec - t0.tv_sec) * 1e3 + (t1.tv_nsec - t0.tv_nsec) / 1e6;
        printf("%s %s (%.0f ms)\n", test_failed ? "FAIL" : "ok  ", tests[i].name, ms);
        fflush(stdout);
        if (test_failed) failed++;
        else passed++;
    }
    printf("test_genloom: %d passed, %d failed\n", passed, failed);
    return failed ? 1 : 0;
}
