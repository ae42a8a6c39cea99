/* Makes 16 terrain tiles with genloom's demo model and writes them as tile-00.png ... tile-15.png.
 *
 *   tiles [MODEL]        (MODEL defaults to models-demo/tiles.onnx)
 *
 * Build (from the repository root; see bindings/c/README.md):
 *   cargo build -p genloom-c
 *   cc bindings/c/examples/tiles.c -Ibindings/c/include target/debug/libgenloom_c.a \
 *      -lm -lpthread -ldl -o tiles */
#include "genloom.h"

#include <stdio.h>
#include <stdlib.h>

#define COUNT 16
#define SEED 7

/* Prints the failed call's status and message; returns 1 if it failed. */
static int failed(genloom_status status, const char *what) {
    if (status == GENLOOM_STATUS_OK) return 0;
    fprintf(stderr, "tiles: %s: %s: %s\n", what, genloom_status_name(status),
            genloom_last_error_message());
    return 1;
}

int main(int argc, char **argv) {
    const char *model = argc > 1 ? argv[1] : "models-demo/tiles.onnx";
    genloom_generator *g = NULL;
    genloom_sample_options *sample = NULL;
    float *latents = NULL;
    unsigned char *pixels = NULL, *png = NULL;
    size_t dim, width, height, latents_len, pixels_len, png_cap = 0, written;
    int rc = 1;

    if (failed(genloom_generator_open_path(model, NULL, &g), "open the model")) goto done;
    if (failed(genloom_generator_get_latent_dim(g, &dim), "read the latent size") ||
        failed(genloom_generator_get_width(g, &width), "read the width") ||
        failed(genloom_generator_get_height(g, &height), "read the height"))
        goto done;

    /* Ask for the sizes, allocate, then fill. */
    if (failed(genloom_generator_get_output_len(g, COUNT, GENLOOM_OUTPUT_LATENTS, &latents_len),
               "size the latents") ||
        failed(genloom_generator_get_output_len(g, COUNT, GENLOOM_OUTPUT_RGBA8, &pixels_len),
               "size the pixels"))
        goto done;
    latents = malloc(latents_len * sizeof *latents);
    pixels = malloc(pixels_len);
    if (latents == NULL || pixels == NULL) goto done;

    /* Gaussian prior, no truncation, no psi, the portable RNG: the defaults; only the seed is set. */
    if (failed(genloom_sample_options_new(&sample), "make sample options") ||
        failed(genloom_sample_options_set_seed(sample, SEED), "set the seed") ||
        failed(genloom_generator_sample(g, sample, COUNT, latents, latents_len, &written),
               "sample latents"))
        goto done;
    if (failed(genloom_generator_generate_rgba8(g, latents, latents_len, NULL, 0, NULL, NULL,
                                                pixels, pixels_len, &written),
               "generate"))
        goto done;

    size_t tile_len = width * height * 4;
    for (int i = 0; i < COUNT; i++) {
        const unsigned char *tile = pixels + (size_t)i * tile_len;
        size_t needed = 0;
        genloom_status s = genloom_pixels_encode_png(tile, tile_len, width, height, png, png_cap,
                                                     &needed);
        if (s == GENLOOM_STATUS_BUFFER_TOO_SMALL) { /* grow to the exact size, encode again */
            free(png);
            png_cap = needed;
            png = malloc(png_cap);
            if (png == NULL) goto done;
            s = genloom_pixels_encode_png(tile, tile_len, width, height, png, png_cap, &needed);
        }
        if (failed(s, "encode a PNG")) goto done;
        char name[32];
        snprintf(name, sizeof name, "tile-%02d.png", i);
        FILE *f = fopen(name, "wb");
        if (f == NULL || fwrite(png, 1, needed, f) != needed) {
            fprintf(stderr, "tiles: cannot write %s\n", name);
            if (f != NULL) fclose(f);
            goto done;
        }
        fclose(f);
    }
    printf("wrote %d tiles of %zux%zu (seed %d, genloom %s) as tile-00.png ... tile-%02d.png\n",
           COUNT, width, height, SEED, genloom_version(), COUNT - 1);
    rc = 0;
done:
    free(png);
    free(pixels);
    free(latents);
    genloom_sample_options_free(sample);
    genloom_generator_free(g);
    return rc;
}
