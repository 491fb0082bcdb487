/* The EXIF orientation reader (formats/decoders/exif.c) on raw TIFF-structured blocks, the payload JPEG
 * APP1 and PNG eXIf hand it. libFuzzer passes each input in a buffer of exactly its size, so
 * AddressSanitizer catches any read outside [data, data + len). */
#include "../../formats/decoders/exif.h"
#include "fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    uint32_t o = kiln_exif_orientation(data, size);
    FUZZ_CHECK(o >= 1 && o <= 8);
    if (o != 1) /* the generated seeds each carry an orientation from 2 to 8 */
        fuzz_accept();
    return 0;
}
