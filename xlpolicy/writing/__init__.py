"""Writers of the generated sheets and of the workbook that carries them."""
