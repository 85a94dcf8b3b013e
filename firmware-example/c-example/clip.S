/* The clip and the table blobs, stored in flash as they are. */
    .section .rodata.stapes_example, "a"
    .balign 4
    .global stapes_example_clip
stapes_example_clip:
    .incbin CLIP_FILE
    .global stapes_example_clip_end
stapes_example_clip_end:
    .balign 4
    .global stapes_example_blob_mfcc
stapes_example_blob_mfcc:
    .incbin BLOB_MFCC_FILE
    .global stapes_example_blob_mfcc_end
stapes_example_blob_mfcc_end:
    .balign 4
    .global stapes_example_blob_pcen
stapes_example_blob_pcen:
    .incbin BLOB_PCEN_FILE
    .global stapes_example_blob_pcen_end
stapes_example_blob_pcen_end:
    .section .note.GNU-stack, "", %progbits
